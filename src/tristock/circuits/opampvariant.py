"""What the op-amp-based variants share: loops whose two channels are one op amp U1 (the
integrator U1A and the Schmitt trigger U1B), with resistors, C1 and diodes around it
(``clamped_schmitt``: a zener clamp behind R5; ``duty_schmitt``: R3A/D3 and R3B/D4).

- ``OpAmpVariant``: the ``Topology`` of such a loop, whose methods delegate to its package's
  module functions (``VariantFunctions``); the board point is the built oscillator's point.
- ``VariantOscillator``: the built oscillator's common half: its parts read off a board at a
  temperature (``of``), the op amp's and rails' point fields, the cached prediction and the
  lines of its printout every variant shares.
- Board reading (``part_at``, ``value_at_temperature``), the spread box's skeleton
  (``variant_box``: parts, the package's own variables, rails, T, the op amp), the op amp's
  sensitivity fields, and the checks both loops run the same way (``dissipation``,
  ``integrator_slew``, ``integrator_capacitor``).
"""

from __future__ import annotations

import dataclasses
import math
from abc import ABC, abstractmethod
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import cached_property
from typing import Any, ClassVar, Self, TypeVar

from tristock.circuits.checks import Warning, capacitor_checks, load_limit
from tristock.circuits.diode import K_OVER_Q, thermal_voltage
from tristock.circuits.opamp_schmitt.spread import opamp_variables
from tristock.circuits.rails import OpAmpModel, Rails, rails_from_supply, square_levels
from tristock.circuits.spreadvars import (
    SpreadBox,
    SpreadVariable,
    ValuedParts,
    part_tempcos,
    part_tolerances,
    rail_tolerances,
    temperature,
)
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import BoardParts, FloatArray, Prediction, Topology
from tristock.spec.model import Spec
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor, value_at
from tristock.stock.units import format_value

P = TypeVar("P")

# ---- reading a board -------------------------------------------------------------------------


def part_at(parts: Mapping[str, Part], designator: str, kind: type[P]) -> P:
    """The part at ``designator``, which must be a ``kind``."""
    part = parts[designator]
    if not isinstance(part, kind):
        raise TypeError(f"{designator}: expected a {kind.__name__}, got {type(part).__name__}")
    return part


def value_at_temperature(parts: Mapping[str, Part], designator: str, temp_c: float) -> float:
    """The value at ``temp_c`` (°C) by its tempco (``stock.parts.value_at``) of the capacitor
    (F) at a designator C..., else of the resistor (Ω); a capacitor without a tempco (class
    II: its band is a spread variable) stays at its value."""
    if designator.startswith("C"):
        cap = part_at(parts, designator, Capacitor)
        tempco = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
        return value_at(cap.value_f, tempco, temp_c)
    res = part_at(parts, designator, Resistor)
    return value_at(res.value_ohm, res.tempco_ppm, temp_c)


# ---- the built oscillator ----------------------------------------------------------------------


def fmt(value: float, unit: str) -> str:
    """A value with its unit, three digits (``format_value``)."""
    return format_value(value, unit, digits=3)


def signed(value: float, unit: str) -> str:
    """``fmt`` with an explicit + on positive values."""
    text = fmt(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


class VariantOscillator(ABC):
    """The common half of a variant's built oscillator, a frozen dataclass with the fields
    ``opamp`` (U1, both channels alike), ``rails``, ``temp_c`` (°C), one float per name of
    ``value_fields`` (a resistor's Ω or C1's F at ``temp_c``: the designator in lower case)
    and one ``Diode`` per name of ``diode_fields`` (likewise)."""

    opamp: OpAmpModel
    rails: Rails
    temp_c: float
    value_fields: ClassVar[tuple[str, ...]]
    diode_fields: ClassVar[tuple[str, ...]]

    def __post_init__(self) -> None:
        for name in self.value_fields:
            v = getattr(self, name)
            if not (math.isfinite(v) and v > 0.0):
                raise ValueError(f"{name}: must be a positive finite value, got {v!r}")
        self.check_diodes()
        square_levels(self.rails, self.opamp)

    def check_diodes(self) -> None:
        """Raise ValueError naming a diode of the wrong kind (none by default)."""
        return None

    @classmethod
    def of(cls, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Self:
        """The board at ``temp_c`` (°C): resistors and C1 moved by their tempcos
        (``value_at_temperature``), the diodes as catalogued (the point moves them:
        ``circuits.diode.diode_at``)."""
        parts = design.parts()
        values = {f: value_at_temperature(parts, f.upper(), temp_c) for f in cls.value_fields}
        diodes = {f: part_at(parts, f.upper(), Diode) for f in cls.diode_fields}
        make: Callable[..., Self] = cls
        opamp = OpAmpModel.from_part(part_at(parts, "U1", OpAmp))
        return make(**values, opamp=opamp, rails=rails, **diodes, temp_c=temp_c)

    def loop_fields(self) -> dict[str, float]:
        """The point's fields of the rails, the op amp (both channels) and the thermal voltage
        at ``temp_c``."""
        m = self.opamp
        return {
            "v_pos": self.rails.v_pos,
            "v_neg": self.rails.v_neg,
            "swing_pos": m.swing_pos_v,
            "swing_neg": m.swing_neg_v,
            "slew_rise": m.slew_rise_v_per_s,
            "slew_fall": m.slew_fall_v_per_s,
            "delay": m.delay_s,
            "gbw": m.gbw_hz,
            "vos1": m.offset_v,
            "ib1": m.bias_a,
            "vos2": m.comparator_offset_v,
            "ib2": m.comparator_bias_a,
            "vt_therm": float(thermal_voltage(self.temp_c)),
        }

    @abstractmethod
    def point(self) -> Any:
        """The model's inputs (the package's point type)."""

    @abstractmethod
    def predict(self, point: Any) -> Prediction:
        """The package's ``predict_point`` at ``point`` on these rails."""

    def prediction(self) -> Prediction:
        return self._prediction

    @cached_property
    def _prediction(self) -> Prediction:
        return self.predict(self.point())

    @property
    def frequency_hz(self) -> float:
        return float(self.prediction().frequency_hz)

    @property
    def period_s(self) -> float:
        return float(self.prediction().period_s)

    @property
    def amplitude_vpp(self) -> float:
        return float(self.prediction().amplitude_vpp)

    @property
    def duty_high(self) -> float:
        return float(self.prediction().duty_high)

    def timing_lines(self) -> list[str]:
        """The printout's last lines: frequency, period and duty; the triangle; the timing."""
        p = self.prediction()
        return [
            f"  frequency {fmt(float(p.frequency_hz), 'Hz')}, period "
            f"{fmt(float(p.period_s), 's')}, high {100.0 * float(p.duty_high):.2f} %",
            f"  triangle {fmt(float(p.amplitude_vpp), 'V')} p-p, midpoint "
            f"{signed(float(p.offset_v), 'V')}; thresholds "
            f"{signed(float(p.threshold_high_v), 'V')} / "
            f"{signed(float(p.threshold_low_v), 'V')}",
            f"  effective switching delay {fmt(float(p.effective_delay_s), 's')}, op-amp "
            f"timing {100.0 * float(p.timing_share):.1f} % of the period",
        ]


# ---- the topology --------------------------------------------------------------------------------


@dataclass(frozen=True)
class VariantFunctions:
    """A variant package's module functions, which its ``OpAmpVariant`` delegates to:
    ``predict(point, v_ref, control)``, ``oscillator(design, rails, temp_c)``,
    ``check(oscillator, opamp=, resistors=, capacitor=, <diode_keyword>=)``,
    ``time_domain(oscillator)``, ``spread(design, spec)``, ``drive_imbalance(point, v_ref)``
    and ``netlist(oscillator, periods=)``."""

    predict: Callable[[Any, float | None, str], Prediction]
    oscillator: Callable[[BoardParts, Rails, float], VariantOscillator]
    check: Callable[..., list[Warning]]
    time_domain: Callable[[Any], Loop]
    spread: Callable[[BoardParts, Spec], SpreadBox]
    drive_imbalance: Callable[[Any, float | None], FloatArray]
    netlist: Callable[..., str]


class OpAmpVariant(Topology):
    """A topology of the op-amp-based variants: U1 (both channels), resistors, C1 and diodes
    (the roles' tables), its physics in its package's ``functions``."""

    functions: VariantFunctions
    #: The keyword under which ``functions.check`` takes the diodes by designator.
    diode_keyword: str = "diodes"

    def designators_of(self, table: str) -> tuple[str, ...]:
        """The designators whose parts come from ``table``, in BOM order."""
        return tuple(r.designator for r in self.roles if r.table == table)

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        return self.functions.predict(point, v_ref, control)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> Any:
        return self.oscillator(design, rails, temp_c).point()

    def oscillator(self, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Any:
        return self.functions.oscillator(design, rails, temp_c)

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        """The package's checks with U1, the resistors, C1 and the diodes of the board."""
        parts = design.parts()
        diodes = {d: part_at(parts, d, Diode) for d in self.designators_of("diodes")}
        return self.functions.check(
            self.oscillator(design, rails),
            opamp=part_at(parts, "U1", OpAmp),
            resistors={d: part_at(parts, d, Resistor) for d in self.designators_of("resistors")},
            capacitor=part_at(parts, "C1", Capacitor),
            **{self.diode_keyword: diodes},
        )

    def time_domain(self, oscillator: Any) -> Loop:
        return self.functions.time_domain(oscillator)

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        return self.functions.spread(design, spec)

    def drive_imbalance(
        self, point: Any, v_ref: float | None, control: str = "series"
    ) -> FloatArray:
        """The package's ``drive_imbalance``; ``control`` is unused (no pot in these loops)."""
        return self.functions.drive_imbalance(point, v_ref)

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        return self.functions.netlist(oscillator, periods=periods)


# ---- the spread box ------------------------------------------------------------------------------

#: The sensitivities of the rails and U1 (both channels) -> the point fields each scales.
OPAMP_SENSITIVITY: Mapping[str, tuple[str, ...]] = {
    "V+": ("v_pos",),
    "V-": ("v_neg",),
    "U1.slew": ("slew_rise", "slew_fall"),
    "U1.delay": ("delay",),
    "U1.gbw": ("gbw",),
    "U1.offset": ("vos1", "vos2"),
    "U1.bias": ("ib1", "ib2"),
}


def valued_parts(design: BoardParts, resistors: tuple[str, ...]) -> ValuedParts:
    """Designator -> (point field, part) of ``resistors`` and C1 (the field: the designator
    in lower case)."""
    parts = design.parts()
    out: dict[str, tuple[str, Resistor | Capacitor]] = {
        d: (d.lower(), part_at(parts, d, Resistor)) for d in resistors
    }
    out["C1"] = ("c1", part_at(parts, "C1", Capacitor))
    return out


def variant_box(
    design: BoardParts,
    spec: Spec,
    *,
    oscillator: Callable[[BoardParts, Rails, float], VariantOscillator],
    resistors: tuple[str, ...],
    diode_variables: list[SpreadVariable],
    drifts: Mapping[str, float],
) -> SpreadBox:
    """The spread box of a variant's board: the centre is the board at 25 °C (at temp_min_c
    when the range is one temperature) with U1's offsets at 0 V and its bias as catalogued;
    the variables ``part_tolerances`` of ``resistors`` and C1, then ``diode_variables``,
    the rails, ``T`` (the parts' tempcos; ``vt_therm`` by k/q and each field of ``drifts``
    by its drift, unit/°C) and U1 (``opamp_schmitt.spread.opamp_variables``)."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    u1 = part_at(design.parts(), "U1", OpAmp)
    point = oscillator(design, rails, 25.0 if ranged else env.temp_min_c).point()
    centre = dataclasses.replace(point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u1.bias_a)
    valued = valued_parts(design, resistors)
    variables = part_tolerances(valued)
    variables += diode_variables
    variables += rail_tolerances(spec, rails)
    if ranged:
        moved = {"vt_therm": K_OVER_Q, **drifts}
        variables.append(temperature(env.temp_min_c, env.temp_max_c, part_tempcos(valued), moved))
    variables += opamp_variables(u1)
    return SpreadBox(centre, tuple(variables))


# ---- checks --------------------------------------------------------------------------------------

#: The integrator's slew rate against the triangle's slope, at least (common practice).
SLEW_MARGIN = 2.0


def dissipation(code: str, designator: str, watts: float, rating: float) -> list[Warning]:
    """A part's dissipation (W) against its power rating (``checks.load_limit``)."""
    w = load_limit(code, watts, rating, f"{designator} dissipation")
    return [w] if w else []


def integrator_slew(p: Prediction, opamp: OpAmpModel) -> list[Warning]:
    """The triangle's slope within ``SLEW_MARGIN`` of U1A's slew rate: a caution, an error
    beyond it."""
    slope = float(p.slope_v_per_s)
    if slope * SLEW_MARGIN <= opamp.slew_rise_v_per_s:
        return []
    return [
        Warning(
            "slew_integrator",
            "caution" if slope < opamp.slew_rise_v_per_s else "error",
            f"the triangle's slope {slope * 1e-6:.3g} V/µs is within {SLEW_MARGIN:g}x of the "
            f"op amp's slew rate {opamp.slew_rise_v_per_s * 1e-6:.3g} V/µs",
        )
    ]


def integrator_capacitor(p: Prediction, opamp: OpAmpModel, capacitor: Capacitor) -> list[Warning]:
    """C1's checks (``checks.capacitor_checks``) at the larger triangle peak plus U1A's offset."""
    v_cap = max(abs(float(p.peak_high_v)), abs(float(p.peak_low_v))) + abs(opamp.offset_v)
    return capacitor_checks("C1", capacitor, v_cap, "the triangle swings both ways")
