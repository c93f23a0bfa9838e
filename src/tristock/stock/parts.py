"""What one row of each part table is.

Every part carries its stock code (``id``, unique across a catalog), a unit cost in the
catalog's currency and the pieces on hand (``stock``). Values are in SI base units: ohm,
farad, volt, ampere, second, hertz; tempcos in ppm/°C; tolerances in percent.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode

#: Dielectrics the catalog accepts. Class I ceramics and plastic films are stable enough for an
#: integrator; class II ceramics drift with temperature and DC bias; electrolytics are polarised.
CLASS_I_DIELECTRICS = frozenset({"C0G", "NP0"})
FILM_DIELECTRICS = frozenset({"PP", "PET", "PPS", "PEN", "PS"})
CLASS_II_DIELECTRICS = frozenset({"X7R", "X5R", "X6S", "X7S", "X8R", "Y5V", "Z5U"})
POLARISED_DIELECTRICS = frozenset({"ALU", "TANT", "NIOBIUM"})
KNOWN_DIELECTRICS = (
    CLASS_I_DIELECTRICS | FILM_DIELECTRICS | CLASS_II_DIELECTRICS | POLARISED_DIELECTRICS
)

PotKind = Literal["trimmer", "panel"]


@dataclass(frozen=True, slots=True)
class Resistor:
    """A fixed resistor: ``value_ohm`` ± ``tolerance_pct`` %, drift ``tempco_ppm`` ppm/°C.

    ``series`` is the IEC 60063 series the value belongs to ("E96"), or None for a
    non-standard value.
    """

    id: str
    value_ohm: float
    tolerance_pct: float
    tempco_ppm: float
    series: str | None
    power_w: float
    package: str
    unit_cost: float
    stock: int

    @property
    def value(self) -> float:
        return self.value_ohm


@dataclass(frozen=True, slots=True)
class Capacitor:
    """A capacitor: ``value_f`` ± ``tolerance_pct`` %.

    Class I and film parts have a linear ``tempco_ppm`` (ppm/°C); class II ceramics instead
    give ``temp_band_pct``, the ± % change over their rated temperature band.
    ``voltage_v`` is the rated DC voltage.
    """

    id: str
    value_f: float
    dielectric: str
    tolerance_pct: float
    tempco_ppm: float | None
    temp_band_pct: float | None
    voltage_v: float
    package: str
    unit_cost: float
    stock: int

    @property
    def value(self) -> float:
        return self.value_f

    @property
    def is_class_ii(self) -> bool:
        return self.dielectric in CLASS_II_DIELECTRICS

    @property
    def is_polarised(self) -> bool:
        return self.dielectric in POLARISED_DIELECTRICS


#: What an op amp's ``delay_s`` means (catalog docs, ``tristock catalog check``).
DELAY_MEANING = (
    "threshold crossing to the start of the output slew: a transport delay in the comparator's "
    "path, saturation recovery included; the build-up a finite GBW adds in the circuit's own "
    "positive feedback is not part of it (the model adds it)"
)


def delay_from_delay_to_mid(delay_to_mid_s: float, step_v: float, slew_v_per_s: float) -> float:
    """``delay_s`` (s) from a datasheet's delay to 50 % of the output swing (s).

    In the model's comparator (a transport delay, then a slew) the output reaches mid-swing
    td + step/(2·SR) after the crossing, with a saturating overdrive, as datasheets measure
    it; so td = delay_to_mid - step/(2·SR). ``step_v`` is the output step of that measurement
    (V): the catalog takes it as the part's full swing at its highest rated supply
    (``OpAmp.full_step_v``), because the rails of the board are not known when a table loads;
    a datasheet measured at a smaller step gives a delay_s that is short by the difference
    over 2·SR (for 10 V less at 10 V/µs, 0.5 µs). Convert by hand into delay_s when the
    datasheet's step is known.
    """
    return delay_to_mid_s - step_v / (2.0 * slew_v_per_s)


@dataclass(frozen=True, slots=True)
class OpAmp:
    """An op-amp part; U1 needs two channels (one dual, or a single part used twice).

    ``supply_min_v``/``supply_max_v`` bound the total supply span (V+ minus V-).
    ``swing_pos_v``/``swing_neg_v`` are the output headroom from each rail (V) at the
    catalogued load; ``slew_v_per_us`` in V/µs; ``gbw_hz`` the gain-bandwidth product;
    ``delay_s`` the comparator's propagation delay (DELAY_MEANING); ``offset_v`` the typical
    input offset, ``bias_a`` the input bias current, ``output_a`` the output current it can
    source or sink while holding its swing. ``delay_to_mid_s`` is the datasheet figure a
    table gave instead of ``delay_s`` (None when it gave ``delay_s``), kept for reference;
    ``delay_s`` then holds its conversion (``delay_from_delay_to_mid``).
    ``input_cm_neg_v``: the lowest input common-mode voltage, from V- (negative: below the
    rail); ``input_cm_pos_headroom_v``: how far below V+ the common-mode range ends
    (negative: beyond the rail); None (a blank cell) means the input reaches that rail.
    """

    id: str
    channels: int
    supply_min_v: float
    supply_max_v: float
    swing_pos_v: float
    swing_neg_v: float
    slew_v_per_us: float
    gbw_hz: float
    delay_s: float
    offset_v: float
    bias_a: float
    output_a: float
    unit_cost: float
    stock: int
    delay_to_mid_s: float | None = None
    input_cm_neg_v: float | None = None
    input_cm_pos_headroom_v: float | None = None

    @property
    def slew_v_per_s(self) -> float:
        return self.slew_v_per_us * 1e6

    @property
    def full_step_v(self) -> float:
        """The output's full swing at the highest rated supply (V): supply_max_v less both
        headrooms; the step ``delay_from_delay_to_mid`` takes a datasheet's delay to be for."""
        return self.supply_max_v - self.swing_pos_v - self.swing_neg_v

    @property
    def packages_per_board(self) -> int:
        """Packages that make one U1: 1 for a dual (or wider), 2 for a single."""
        return 1 if self.channels >= 2 else 2

    @property
    def cost_per_board(self) -> float:
        return self.unit_cost * self.packages_per_board


@dataclass(frozen=True, slots=True)
class Pot:
    """A potentiometer or trimmer: end-to-end ``value_ohm`` ± ``tolerance_pct`` %."""

    id: str
    value_ohm: float
    tolerance_pct: float
    tempco_ppm: float
    kind: PotKind
    unit_cost: float
    stock: int

    @property
    def value(self) -> float:
        return self.value_ohm


Part = Resistor | Capacitor | OpAmp | Pot | Comparator | Diode


def value_at(value: float, tempco_ppm: float, temp_c: float) -> float:
    """value(T) = value(25 °C)·(1 + tc·(T - 25 °C)), tc in ppm/°C."""
    return value * (1.0 + tempco_ppm * 1e-6 * (temp_c - 25.0))
