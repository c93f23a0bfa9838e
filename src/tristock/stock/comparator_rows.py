"""One comparators.csv row -> a ``Comparator``, every cell checked (``rows.RowReader``)."""

from __future__ import annotations

import math

from tristock.stock.comparators import (
    COMPARATOR_OUTPUTS,
    Comparator,
    ComparatorOutput,
    edge_start_s,
)
from tristock.stock.rows import RowReader


def _show(value: float) -> str:
    return f"{value:g}"


def positive(value: float) -> str | None:
    return None if value > 0 else f"must be > 0, got {_show(value)}"


def non_negative(value: float) -> str | None:
    return None if value >= 0 else f"must be >= 0, got {_show(value)}"


def _output_kind(row: RowReader) -> ComparatorOutput | None:
    text = row.text("output").strip().lower()
    for kind in COMPARATOR_OUTPUTS:
        if text == kind:
            return kind
    if text:
        row.error("output", f"must be push-pull or open-drain, got {row.raw('output')!r}")
    return None


def _edges(row: RowReader) -> tuple[float, float, float]:
    """(delay_s, rise_s, fall_s); the linear edges must not start before the crossing."""
    delay = row.number("delay_s", non_negative)
    rise = row.number("rise_s", positive)
    fall = row.number("fall_s", positive)
    for name, edge in (("rise_s", rise), ("fall_s", fall)):
        if not math.isnan(delay) and not math.isnan(edge) and edge_start_s(delay, edge) < 0:
            row.error(
                "delay_s",
                f"{_show(delay)} s is less than half the whole {name[:4]} edge "
                f"({_show(edge)} s 10-90 % is {_show(edge / 0.8)} s 0-100 %): a linear edge "
                "would start before the threshold crossing",
            )
            break
    return delay, rise, fall


def build_comparator(row: RowReader) -> Comparator | None:
    part_id = row.text("id")
    if part_id and any(ch.isspace() for ch in part_id):
        row.error("id", f"{part_id!r} contains blanks")
    channels = row.count("channels", 1)
    output = _output_kind(row)
    supply_min = row.number("supply_min_v", positive)
    supply_max = row.number("supply_max_v", positive)
    if supply_min >= supply_max:  # False when either is NaN (already reported)
        row.error(
            "supply_min_v",
            f"must be less than supply_max_v ({_show(supply_min)} >= {_show(supply_max)})",
        )
    delay, rise, fall = _edges(row)
    vol = row.number("vol_v", non_negative)
    headroom = row.optional_number("voh_headroom_v", non_negative)
    if output == "push-pull" and not row.raw("voh_headroom_v"):
        row.error("voh_headroom_v", "is required for a push-pull output")
    if output == "open-drain" and row.raw("voh_headroom_v"):
        row.error("voh_headroom_v", "must be blank for an open-drain output (R5 pulls it up)")
    if headroom is not None and vol + headroom >= supply_max:
        row.error(
            "voh_headroom_v",
            f"vol_v + voh_headroom_v ({_show(vol + headroom)} V) leaves no output range "
            f"within supply_max_v ({_show(supply_max)} V)",
        )
    offset = row.number("offset_v")
    bias = row.number("bias_a")
    output_a = row.number("output_a", positive)
    cm_neg = row.optional_number("input_cm_neg_v")
    cm_pos = row.optional_number("input_cm_pos_headroom_v")
    cost = row.number("unit_cost", non_negative)
    stock = row.count("stock", 0)
    if not row.ok or output is None:
        return None
    return Comparator(
        part_id, channels, output, supply_min, supply_max, delay, rise, fall, vol, headroom,
        offset, bias, output_a, cm_neg, cm_pos, cost, stock,
    )  # fmt: skip
