"""One table row -> one part: every cell checked, every problem recorded at its column.

:class:`RowReader` reads the typed cells of a row and records an issue for each wrong one (then
returns a placeholder, so the rest of the row is still checked); :data:`BUILDERS` turns a row
of each kind into its part, or None when any cell was wrong. Numbers take SI prefixes and
IEC 60062 codes (``4k7``); values are in SI units.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Final

from tristock.stock import eseries, units
from tristock.stock.columns import CatalogIssue
from tristock.stock.parts import (
    CLASS_I_DIELECTRICS,
    CLASS_II_DIELECTRICS,
    FILM_DIELECTRICS,
    KNOWN_DIELECTRICS,
    Capacitor,
    OpAmp,
    Part,
    Pot,
    PotKind,
    Resistor,
    delay_from_delay_to_mid,
)

#: Tolerance range accepted for resistors, capacitors and pots: (0, 50] %.
TOLERANCE_MAX_PCT: Final[float] = 50.0
POT_KINDS: Final[tuple[PotKind, ...]] = ("trimmer", "panel")


def parse_number(text: str) -> float:
    """A finite number from a table cell: plain, SI prefix (4.7k) or IEC 60062 code (4k7).

    A leading sign is allowed ("-200"); columns that must be positive check that themselves.
    Raises ValueError quoting the text.
    """
    return units.parse_value(text, allow_negative=True)


def _show(value: float) -> str:
    return f"{value:g}"


class RowReader:
    """Reads the typed cells of one row, recording an issue for each cell that is wrong.

    Accessors return a placeholder after recording an issue so that every cell of a row is
    checked; ``ok`` tells whether the row may become a part.
    """

    def __init__(
        self, file: str, line: int, cells: dict[str, str], issues: list[CatalogIssue]
    ) -> None:
        self.file = file
        self.line = line
        self.cells = cells
        self.issues = issues
        self._first_issue = len(issues)

    @property
    def ok(self) -> bool:
        return len(self.issues) == self._first_issue

    def error(self, column: str, message: str) -> None:
        self.issues.append(CatalogIssue(self.file, self.line, column, message))

    def raw(self, column: str) -> str:
        return self.cells.get(column, "")

    def text(self, column: str) -> str:
        value = self.raw(column)
        if not value:
            self.error(column, "is empty")
        return value

    def number(self, column: str, check: Callable[[float], str | None] | None = None) -> float:
        value = self.optional_number(column, check)
        if value is None:
            if not self.raw(column):
                self.error(column, "is empty")
            return math.nan
        return value

    def optional_number(
        self, column: str, check: Callable[[float], str | None] | None = None
    ) -> float | None:
        """The cell's number, or None when blank (or wrong, after recording why)."""
        text = self.raw(column)
        if not text:
            return None
        try:
            value = parse_number(text)
        except ValueError as exc:
            self.error(column, str(exc))
            return None
        problem = check(value) if check else None
        if problem:
            self.error(column, problem)
            return None
        return value

    def count(self, column: str, minimum: int) -> int:
        """A whole number >= ``minimum`` (stock, channels)."""
        value = self.number(column)
        if math.isnan(value):
            return 0
        if not value.is_integer():
            self.error(column, f"must be a whole number, got {_show(value)}")
            return 0
        if value < minimum:
            self.error(column, f"must be >= {minimum}, got {_show(value)}")
            return 0
        return int(value)


def _positive(value: float) -> str | None:
    return None if value > 0 else f"must be > 0, got {_show(value)}"


def _non_negative(value: float) -> str | None:
    return None if value >= 0 else f"must be >= 0, got {_show(value)}"


def _tolerance(value: float) -> str | None:
    if 0 < value <= TOLERANCE_MAX_PCT:
        return None
    return f"must be in (0, {_show(TOLERANCE_MAX_PCT)}] %, got {_show(value)}"


def _check_id(row: RowReader) -> str:
    part_id = row.text("id")
    if part_id and any(ch.isspace() for ch in part_id):
        row.error("id", f"{part_id!r} contains blanks")
    return part_id


# --------------------------------------------------------------------------------------------
# One builder per kind: cells -> part (or issues)


def _build_resistor(row: RowReader) -> Resistor | None:
    part_id = _check_id(row)
    value = row.number("value_ohm", _positive)
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.number("tempco_ppm")
    series: str | None = None
    series_text = row.raw("series")
    if series_text:
        try:
            series = eseries.parse_series(series_text)
        except ValueError as exc:
            row.error("series", str(exc))
    if series is not None and not math.isnan(value) and not eseries.is_member(series, value):
        row.error("value_ohm", f"{row.raw('value_ohm')!r} is not an {series} value")
    power = row.number("power_w", _positive)
    package = row.text("package")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Resistor(part_id, value, tolerance, tempco, series, power, package, cost, stock)


def _build_capacitor(row: RowReader) -> Capacitor | None:
    part_id = _check_id(row)
    value = row.number("value_f", _positive)
    dielectric = row.text("dielectric").upper()
    if dielectric and dielectric not in KNOWN_DIELECTRICS:
        known = ", ".join(sorted(KNOWN_DIELECTRICS))
        row.error("dielectric", f"unknown dielectric {row.raw('dielectric')!r} (known: {known})")
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.optional_number("tempco_ppm")
    band = row.optional_number("temp_band_pct", _non_negative)
    if dielectric in CLASS_I_DIELECTRICS | FILM_DIELECTRICS and not row.raw("tempco_ppm"):
        row.error("tempco_ppm", f"is required for {dielectric} (class I and film dielectrics)")
    if dielectric in CLASS_II_DIELECTRICS and not row.raw("temp_band_pct"):
        row.error("temp_band_pct", f"is required for {dielectric} (class II dielectric)")
    voltage = row.number("voltage_v", _positive)
    package = row.text("package")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Capacitor(
        part_id, value, dielectric, tolerance, tempco, band, voltage, package, cost, stock
    )


def _build_opamp(row: RowReader) -> OpAmp | None:
    part_id = _check_id(row)
    channels = row.count("channels", 1)
    supply_min = row.number("supply_min_v", _positive)
    supply_max = row.number("supply_max_v", _positive)
    if supply_min >= supply_max:  # False when either is NaN (already reported)
        row.error(
            "supply_min_v",
            f"must be less than supply_max_v ({_show(supply_min)} >= {_show(supply_max)})",
        )
    swing_pos = row.number("swing_pos_v", _non_negative)
    swing_neg = row.number("swing_neg_v", _non_negative)
    if swing_pos + swing_neg >= supply_max:
        row.error(
            "swing_pos_v",
            f"swing_pos_v + swing_neg_v ({_show(swing_pos + swing_neg)} V) leaves no output "
            f"range within supply_max_v ({_show(supply_max)} V)",
        )
    slew = row.number("slew_v_per_us", _positive)
    gbw = row.number("gbw_hz", _positive)
    delay, delay_to_mid = _opamp_delay(row, slew, supply_max - swing_pos - swing_neg)
    offset = row.number("offset_v")
    bias = row.number("bias_a")
    output = row.number("output_a", _positive)
    cm_neg = row.optional_number("input_cm_neg_v")
    cm_pos = row.optional_number("input_cm_pos_headroom_v")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return OpAmp(
        part_id,
        channels,
        supply_min,
        supply_max,
        swing_pos,
        swing_neg,
        slew,
        gbw,
        delay,
        offset,
        bias,
        output,
        cost,
        stock,
        delay_to_mid,
        cm_neg,
        cm_pos,
    )


def _opamp_delay(row: RowReader, slew_v_per_us: float, step_v: float) -> tuple[float, float | None]:
    """(delay_s, delay_to_mid_s or None) of an op-amp row: one of the two columns, never both;
    delay_to_mid_s is converted with ``parts.delay_from_delay_to_mid`` at the part's full
    output step (``OpAmp.full_step_v``)."""
    given = [name for name in ("delay_s", "delay_to_mid_s") if row.raw(name)]
    if len(given) == 2:
        row.error("delay_to_mid_s", "give delay_s or delay_to_mid_s, not both")
        return math.nan, None
    if not given and "delay_to_mid_s" in row.cells:
        row.error("delay_s", "is empty, and so is delay_to_mid_s: give one of them")
        return math.nan, None
    if given != ["delay_to_mid_s"]:
        return row.number("delay_s", _non_negative), None
    mid = row.number("delay_to_mid_s", _non_negative)
    if math.isnan(mid) or math.isnan(slew_v_per_us) or math.isnan(step_v):
        return math.nan, None
    slewing = step_v / (2.0 * slew_v_per_us * 1e6)
    delay = delay_from_delay_to_mid(mid, step_v, slew_v_per_us * 1e6)
    if delay < 0.0:
        row.error(
            "delay_to_mid_s",
            f"{_show(mid)} s is less than the {_show(slewing)} s the output takes to slew half "
            f"its {_show(step_v)} V step at {_show(slew_v_per_us)} V/µs",
        )
        return math.nan, None
    return delay, mid


def _build_pot(row: RowReader) -> Pot | None:
    part_id = _check_id(row)
    value = row.number("value_ohm", _positive)
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.number("tempco_ppm")
    kind_text = row.text("kind").lower()
    kind: PotKind = "trimmer"
    if kind_text == "panel":
        kind = "panel"
    elif kind_text and kind_text != "trimmer":
        row.error("kind", f"must be trimmer or panel, got {row.raw('kind')!r}")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Pot(part_id, value, tolerance, tempco, kind, cost, stock)


BUILDERS: Final[dict[str, Callable[[RowReader], Part | None]]] = {
    "resistors": _build_resistor,
    "capacitors": _build_capacitor,
    "opamps": _build_opamp,
    "pots": _build_pot,
}
