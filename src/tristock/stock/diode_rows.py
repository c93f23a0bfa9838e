"""One ``diodes.csv`` row -> a ``Diode`` (``stock.diodes``): every cell checked, each problem
recorded at its column as in ``stock.rows``."""

from __future__ import annotations

import math

from tristock.stock.diodes import VF_MAX_V, Diode, DiodeKind
from tristock.stock.rows import TOLERANCE_MAX_PCT, RowReader


def _show(value: float) -> str:
    return f"{value:g}"


def _positive(value: float) -> str | None:
    return None if value > 0 else f"must be > 0, got {_show(value)}"


def _non_negative(value: float) -> str | None:
    return None if value >= 0 else f"must be >= 0, got {_show(value)}"


def _tolerance(value: float) -> str | None:
    if 0 < value <= TOLERANCE_MAX_PCT:
        return None
    return f"must be in (0, {_show(TOLERANCE_MAX_PCT)}] %, got {_show(value)}"


def _forward_drop(value: float) -> str | None:
    if 0 < value <= VF_MAX_V:
        return None
    return f"must be in (0, {_show(VF_MAX_V)}] V (the forward drop at 1 mA), got {_show(value)}"


def _diode_kind(row: RowReader) -> DiodeKind:
    text = row.text("kind").lower()
    if text == "zener":
        return "zener"
    if text and text != "signal":
        row.error("kind", f"must be zener or signal, got {row.raw('kind')!r}")
    return "signal"


def build_diode(row: RowReader) -> Diode | None:
    """One ``diodes.csv`` row -> a Diode, or None after recording every wrong cell."""
    part_id = row.text("id")
    if part_id and any(ch.isspace() for ch in part_id):
        row.error("id", f"{part_id!r} contains blanks")
    kind = _diode_kind(row)
    vz: float | None = None
    iz: float | None = None
    if kind == "zener":
        vz = row.number("vz_v", _positive)
        iz = row.number("iz_test_a", _positive)
        rz = row.number("rz_ohm", _non_negative)
    else:
        for column in ("vz_v", "iz_test_a"):
            if row.raw(column):
                row.error(column, "is for zeners: leave it blank for a signal diode")
        series = row.optional_number("rz_ohm", _non_negative)
        rz = 0.0 if series is None else series
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.number("tempco_mv_per_c")
    vf = row.number("vf_v", _forward_drop)
    power = row.number("power_w", _positive)
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    assert not math.isnan(vf)
    return Diode(part_id, kind, vz, iz, tolerance, tempco, rz, vf, power, cost, stock)
