"""The comparator-IC loop's stage options: U1 × U2 (× R5 for an open-drain U2), what makes
each usable on the spec's rails, and the ``StageLoop`` the search's bounds take.

The loop's timing (``physics``): U2's edges are linear, the whole edge τ = rise/0.8 centred
on the 50 % delay td, with no GBW build-up (gbw = inf), so an edge acts on the integrator as a
switch exactly td after the crossing, and the triangle overshoots by its slope times
td - (τ/2)·(1 - drive/span). ``looptiming.loop_timing`` with one slew SR = span_lo/τe and
delay td - τe/2, τe = min(rise, fall)/0.8, and U1's GBW as the integrator's, is:

- push-pull with rise = fall: ``physics.predict``'s period, high time and peaks exactly;
- rise ≠ fall: the period and duty still exactly (an edge's centroid is td whatever its
  length); each overshoot at least the model's (τe is the shorter edge), so the amplitude's
  upper bound holds, but the loop's own lower end may overstate it by slope·|τr - τf|·
  (1 - drive/span)/2;
- open drain: the centroid at the span's low end is td and later above it (the period's
  bounds hold, ``stagelevels``); the overshoot at the strong drive is at least the model's
  (the amplitude's upper bound holds), but at the weak drive the loop's own can exceed the
  model's, whose share of an edge before Ve follows the row's own high level.

So for those two the amplitude's lower end takes ``StageLoop.overshoot_time_min`` = td -
τ_max/2 instead (``search.bounds.overshoot_floors``): the model's overshoot time is
o = td - (τ/2)·(L + Ve)/(H + L) on either edge (H the high level as the edge happens), at
least td - τ_max/2 since 0 < L + Ve < H + L in an oscillating row; and each overshoot is at
least its drive times o over the row's RC' (``physics``: the lag's part less its area is
≥ 0, the falling edge's slope (H_lo - Ve)/RC'_hi with H_lo ≥ vh_lo, RC'_hi ≤ RC'_lo).
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, TypeVar

import numpy as np

from tristock.circuits.comparator_schmitt.commonmode import (
    divider_ceiling,
    opamp_input_reason,
    reference_reason,
)
from tristock.circuits.comparator_schmitt.stagelevels import (
    LoadBox,
    load_box,
    load_vertices,
    sources,
    stage_levels,
    threshold_level,
    threshold_level_floor,
)
from tristock.circuits.opamp_schmitt.searchform import opamp_levels
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.searchform import F64, Exclusion, StageLoop, StageOption
from tristock.stock.comparators import EDGE_SHARE, Comparator
from tristock.stock.parts import OpAmp, Part, Resistor

if TYPE_CHECKING:
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog

P = TypeVar("P", bound=Part)


@dataclass(frozen=True)
class ComparatorStage(StageOption):
    """U1 (``opamp``), U2 (``comparator``), R5 (``pull_up``, None for push-pull) and the load
    box its open-drain level interval is taken over; ``k_ceiling`` (k_max, words): no row
    with k = R1/R2 above k_max keeps U2's + input inside its common-mode range
    (``commonmode.divider_ceiling``; inf: no ceiling)."""

    opamp: OpAmp
    comparator: Comparator
    pull_up: Resistor | None
    load: LoadBox
    k_ceiling: tuple[float, str]

    @property
    def pull_up_ohm(self) -> float:
        """R5 (Ω); 0 for a push-pull U2."""
        return self.pull_up.value_ohm if self.pull_up is not None else 0.0


def stage_loop(
    u1: OpAmp, u2: Comparator, levels: tuple[float, float, float, float],
    ve: tuple[float, float],
) -> StageLoop:  # fmt: skip
    """The bounds' loop (module docstring): levels (vh_lo, vh_hi, vl_lo, vl_hi), Ve over
    ``ve``; the slew is the span's low end over the shorter whole edge; the overshoot time's
    lower end td - τ_max/2 (≥ 0: ``edge_start_s``) where the loop's own is not one (unequal
    edges or an open drain), else NaN."""
    tau = min(u2.rise_s, u2.fall_s) / EDGE_SHARE
    slew = (levels[0] + levels[2]) / tau if tau > 0.0 else math.inf
    o_min = math.nan
    if u2.is_open_drain or u2.rise_s != u2.fall_s:
        o_min = u2.delay_s - max(u2.rise_s, u2.fall_s) / EDGE_SHARE / 2.0
    values = (*levels, slew, slew, u2.delay_s - tau / 2.0, math.inf, u1.gbw_hz, *ve, 0.0, o_min)
    return StageLoop(*(np.asarray(x, dtype=np.float64) for x in values))


def make_stage(
    index: int, u1: OpAmp, u2: Comparator, r5: Resistor | None, box: LoadBox, rails: Rails,
    ve: tuple[float, float],
) -> ComparatorStage:  # fmt: skip
    """The stage option: one piece of each part per board (U1 one channel, U2 one channel,
    R5), its loop on ``rails``, Ve over ``ve``; ``levels`` (vh_hi, vl_hi): Hs and L."""
    ohm = r5.value_ohm if r5 else 0.0
    levels = stage_levels(u1, u2, ohm, box, rails, ve[1])
    h_min = threshold_level_floor(u1, u2, ohm, box, rails)
    parts: dict[str, Part] = {"U1": u1, "U2": u2}
    if r5 is not None:
        parts["R5"] = r5
    return ComparatorStage(
        index=index,
        parts=parts,
        stock_needs=tuple((p, 1) for p in parts.values()),
        cost_per_board=sum(p.unit_cost for p in parts.values()),
        lines=len({p.id for p in parts.values()}),
        loop=stage_loop(u1, u2, levels, ve),
        levels=(levels[1], levels[3]),
        integrator_bias_a=u1.bias_a,
        opamp=u1,
        comparator=u2,
        pull_up=r5,
        load=box,
        k_ceiling=divider_ceiling(u2, rails, h_min, box.r_hi),
    )


def usable_error_voltages(
    u1: OpAmp, u2: Comparator, r5_ohm: float, box: LoadBox, rails: Rails, r3: F64
) -> F64:
    """Ve = Vos1 + Ib1·R3 of each R3 in ``r3`` with which some row can oscillate: L + Ve > 0
    and the high level at the bottom threshold above Ve at its largest over the box
    (push-pull: Hs; open drain: R2 at r_lo or r_hi, Ib2·R1/(R1 + R2) at 0 or Ib2, the
    offsets as catalogued)."""
    hs, low = sources(u2, rails)
    ve = u1.offset_v + u1.bias_a * r3
    high = np.full(len(r3), hs)
    if r5_ohm > 0.0:
        high = np.full(len(r3), -math.inf)
        for g2 in (1.0 / box.r_hi, 1.0 / box.r_lo):
            for j in (0.0, u2.bias_a):
                level = threshold_level(hs, 1.0 / r5_ohm, 1.0 / r3, g2, u1.offset_v, u2.offset_v, j)
                high = np.maximum(high, level)
    return np.asarray(ve[(high - ve > 0.0) & (low + ve > 0.0)])


def comparator_reason(u2: Comparator, spec: Spec) -> str | None:
    """Why U2 cannot be used on the spec's rails at all (its supply rating over the rails'
    tolerance, levels not both sides of the reference, or its - input, at the reference,
    outside its common-mode range), or None."""
    supply = spec.supply
    span_lo = supply.span_v * (1 - supply.tolerance_pct / 100)
    span_hi = supply.span_v * (1 + supply.tolerance_pct / 100)
    if span_lo < u2.supply_min_v or span_hi > u2.supply_max_v:
        return (
            f"supply span {span_lo:g}..{span_hi:g} V is outside its rating "
            f"{u2.supply_min_v:g}..{u2.supply_max_v:g} V"
        )
    rails = rails_from_supply(supply)
    hs, low = sources(u2, rails)
    if not (hs > 0.0 and low > 0.0):
        return "its output cannot swing both sides of the reference on these rails"
    return reference_reason(u2, rails)


def sink_reason(u2: Comparator, r5: Resistor, rails: Rails) -> str | None:
    """Why R5 overloads U2 on its own, or None: with U2 low it sinks (V+ - V- - VOL)/R5 on the
    nominal rails, above U2's output_a (the current its VOL holds at; the topology's
    load_comparator check adds the load's current to it)."""
    current = (rails.v_pos - rails.v_neg - u2.vol_v) / r5.value_ohm
    if current > u2.output_a:
        return f"with U2 {u2.id} it sinks {current:.3g} A > {u2.output_a:.3g} A (output_a)"
    return None


def stiffness_reason(r5: Resistor, box: LoadBox) -> str | None:
    """Why no row can meet the stiffness rule with pull-up R5 (``stagelevels.
    PULL_UP_LOAD_SHARE``: R5·(1/R3 + 1/R2) ≤ ρ, at least 2·R5/r_hi), or None."""
    if load_vertices(1.0 / r5.value_ohm, box):
        return None
    return (
        f"the stiffness rule R5 <= {box.max_load:g} x (R3 || R2) fails for every R2, R3 up to "
        f"{box.r_hi:.4g} ohm"
    )


def stocked(parts: Sequence[P], designator: str, boards: int) -> tuple[list[P], list[Exclusion]]:
    """The parts with a piece for every board, and the others as exclusions."""
    kept: list[P] = []
    excl: list[Exclusion] = []
    for p in parts:
        if p.stock < boards:
            excl.append(Exclusion(designator, p.id, f"stock {p.stock} < {boards} needed"))
        else:
            kept.append(p)
    return kept, excl


def stage_options(
    spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
) -> tuple[list[ComparatorStage], list[Exclusion]]:
    """Every usable stage on the spec's nominal rails, in catalog order (U1, then U2, then
    R5), and why each other candidate was left out: U1 as the spec allows
    (``limits.opamps``), stocked for every board, its supply rating over the rails'
    tolerance, its output both sides of the reference, its inputs (the reference plus its
    offset) inside its common-mode range; U2 stocked, its own rating, its levels both sides
    of the reference, its - input (the reference) inside its common-mode range (the spec has
    no limit on comparators); R5 for an
    open-drain U2 stocked, not overloading U2 alone (``sink_reason``) and light enough for
    the stiffness rule with some R2, R3 (``stiffness_reason``); each combination
    with Ve inside its levels for some R3 (``usable_error_voltages``). Those made before
    ``deadline`` (``time.perf_counter()``) only: ``SearchForm.stage_options``."""
    lim, boards = spec.limits, spec.build.boards
    rails = rails_from_supply(spec.supply)
    allowed = tuple(p for p in catalog.opamps if lim.opamps is None or p.id in lim.opamps)
    u1s, excl = stocked(allowed, "U1", boards)
    usable_u1: list[OpAmp] = []
    for u1 in u1s:
        found = opamp_levels(u1, spec)
        reason = found if isinstance(found, str) else opamp_input_reason(u1, rails)
        if reason is not None:
            excl.append(Exclusion("U1", u1.id, reason))
        else:
            usable_u1.append(u1)
    u2s, more = stocked(catalog.comparators, "U2", boards)
    excl += more
    usable_u2: list[Comparator] = []
    for u2 in u2s:
        reason = comparator_reason(u2, spec)
        if reason is None:
            usable_u2.append(u2)
        else:
            excl.append(Exclusion("U2", u2.id, reason))
    pull_ups: list[Resistor] = []
    if any(u2.is_open_drain for u2 in usable_u2):
        pull_ups, more = stocked(catalog.resistors, "R5", boards)
        excl += more
    box = load_box(spec, r3_values, r3_values, catalog.resistors)
    for_u2: dict[str, list[Resistor | None]] = {}
    for u2 in usable_u2:
        for_u2[u2.id] = [None]
        if u2.is_open_drain:
            for_u2[u2.id] = []
            for pull in pull_ups:
                if time.perf_counter() > deadline:
                    return [], excl
                reason = sink_reason(u2, pull, rails) or stiffness_reason(pull, box)
                if reason is None:
                    for_u2[u2.id].append(pull)
                else:
                    excl.append(Exclusion("R5", pull.id, reason))
    stages: list[ComparatorStage] = []
    for u1 in usable_u1:
        for u2 in usable_u2:
            for r5 in for_u2[u2.id]:
                if time.perf_counter() > deadline:
                    return stages, excl
                ohm = r5.value_ohm if r5 else 0.0
                ve = usable_error_voltages(u1, u2, ohm, box, rails, r3_values)
                if len(ve) == 0:
                    who = ("R5", r5.id) if r5 else ("U1", u1.id)
                    excl.append(
                        Exclusion(
                            *who,
                            f"with U1 {u1.id} and U2 {u2.id} the integrator error voltage "
                            "Vos + Ib·R3 reaches a square level for every R3",
                        )
                    )
                    continue
                ve_range = (float(ve.min()), float(ve.max()))
                stages.append(make_stage(len(stages), u1, u2, r5, box, rails, ve_range))
    return stages, excl
