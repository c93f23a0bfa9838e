"""The zener-clamped loop's stage options on a spec: every usable (U1, zener part for D1/D2,
R5), with the reasons each other candidate was left out (``clamplevels`` for the levels and
the stage limits)."""

from __future__ import annotations

import math
import time
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

from tristock.circuits.clamped_schmitt.checks import CLAMP_ERROR
from tristock.circuits.clamped_schmitt.clamplevels import (
    ClampStage,
    LimitVerdict,
    LoadRange,
    candidate_columns,
    clamp_limits,
    fixed_fields,
    rest_levels,
    saturation_reasons,
    stage_loop,
)
from tristock.circuits.clamped_schmitt.designpoint import DESIGN_CURRENT, design_levels
from tristock.circuits.opamp_schmitt.searchform import opamp_levels, stocked_opamps
from tristock.circuits.rails import OpAmpModel, Rails, rails_from_supply
from tristock.circuits.searchform import F64, Exclusion
from tristock.stock.diodes import Diode
from tristock.stock.eseries import is_member
from tristock.stock.parts import OpAmp, Part, Resistor
from tristock.stock.units import format_value

if TYPE_CHECKING:
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog

OpAmpAt = tuple[OpAmp, OpAmpModel, float, float]


#: Stage options made between two looks at the clock (about 2 ms of work).
PACE = 128


def clamp_resistors(spec: Spec, catalog: Catalog) -> list[Resistor]:
    """The resistors R5 may be: those the search's resistor table holds, by its rules
    (``search.parts.eligible_resistors``, a layer above: the spec's value range, its series
    by drawer or by value, stock for every board)."""
    lim = spec.limits
    names = lim.resistor_series
    return [
        r
        for r in catalog.resistors
        if lim.resistance_min_ohm <= r.value_ohm <= lim.resistance_max_ohm
        and (names is None or r.series in names or any(is_member(s, r.value_ohm) for s in names))
        and r.stock >= spec.build.boards
    ]


def stocked_zeners(spec: Spec, catalog: Catalog) -> tuple[list[Diode], list[Exclusion]]:
    """The zeners of the diode table with two pieces (D1 and D2) for every board; the others
    as exclusions (designator "D1")."""
    need = 2 * spec.build.boards
    found: list[Diode] = []
    excl: list[Exclusion] = []
    for d in catalog.diodes:
        if not d.is_zener:
            continue
        if d.stock < need:
            excl.append(Exclusion("D1", d.id, f"stock {d.stock} < {need} needed (D1 and D2)"))
            continue
        found.append(d)
    return found, excl


def loads(spec: Spec, resistors: Sequence[Resistor], r3_values: F64) -> tuple[LoadRange, LoadRange]:
    """The loads of the rows (``LoadRange``): R3 over ``r3_values``, R1 + R2 over twice the
    smallest to twice the largest of ``resistors``, the triangle within the band's largest
    amplitude; then the same with every value moved by the largest and smallest factor
    (1 ± tol)·(1 + tempco·(T - 25 °C)) of ``resistors`` over the spec's temperatures."""
    env, tri = spec.environment, spec.triangle
    a_max = tri.amplitude_vpp * (1 + tri.tolerance_pct / 100)
    values = np.array([r.value_ohm for r in resistors], dtype=float)
    nominal = LoadRange(
        float(np.min(r3_values)), float(np.max(r3_values)),
        2.0 * float(values.min()), 2.0 * float(values.max()), a_max,
    )  # fmt: skip
    tol = np.array([r.tolerance_pct / 100 for r in resistors])
    drift = np.array(
        [[r.tempco_ppm * 1e-6 * (t - 25.0) for t in (env.temp_min_c, env.temp_max_c)]
         for r in resistors]
    )  # fmt: skip
    lo = float(np.min((1 - tol) * (1 + drift.min(axis=1))))
    hi = float(np.max((1 + tol) * (1 + drift.max(axis=1))))
    spread = LoadRange(nominal.r3_lo * lo, nominal.r3_hi * hi, nominal.rl_lo * lo,
                       nominal.rl_hi * hi, a_max)  # fmt: skip
    return nominal, spread


def make_stage(
    index: int,
    opamp: OpAmpAt,
    zeners: tuple[Diode, Diode],
    r5: Resistor,
    load: tuple[LoadRange, LoadRange],
    levels: Sequence[float],
    ve: tuple[float, float],
    fixed: Mapping[str, float],
    turn_v: float = float("inf"),
) -> ClampStage:
    """The stage option: U1's packages, D1 and D2 (two pieces of one code, or one each), R5;
    its cost and lines; the loop with the level intervals ``levels`` (VH_lo, VH_hi, VL_lo,
    VL_hi) and Ve over ``ve``; ``levels`` the intervals' middles. ``opamp`` is U1 with its
    model and output levels (VH, VL) on the nominal rails; ``fixed`` the point fields the
    stage fixes (``clamplevels.fixed_fields``); ``turn_v`` the turns' reach the levels were
    taken with (``turn_reach``)."""
    part, model, out_h, out_l = opamp
    d1, d2 = zeners
    diodes: tuple[tuple[Part, int], ...] = ((d1, 2),) if d1 == d2 else ((d1, 1), (d2, 1))
    needs = ((part, part.packages_per_board), *diodes, (r5, 1))
    vh_lo, vh_hi, vl_lo, vl_hi = (float(x) for x in levels)
    return ClampStage(
        index=index,
        parts={"U1": part, "D1": d1, "D2": d2, "R5": r5},
        stock_needs=needs,
        cost_per_board=sum(p.unit_cost * n for p, n in needs),
        lines=len({p.id for p, _ in needs}),
        loop=stage_loop((vh_lo, vh_hi, vl_lo, vl_hi), model, (out_h, out_l), ve),
        levels=(0.5 * (vh_lo + vh_hi), 0.5 * (vl_lo + vl_hi)),
        integrator_bias_a=model.bias_a,
        part=part,
        model=model,
        d1=d1,
        d2=d2,
        r5=r5,
        load=load[0],
        spread_load=load[1],
        fixed=fixed,
        turn_v=turn_v,
    )


def limit_exclusions(
    part: OpAmp, zener: Diode, resistors: Sequence[Resistor], verdict: LimitVerdict
) -> list[Exclusion]:
    """One exclusion per stage limit that leaves R5 values of one zener out, naming their
    range (``verdict`` over ``resistors``)."""
    reasons = (
        (verdict.breaks_down, f"the zener current stays below {CLAMP_ERROR:g} of its test "
         "current even at the lightest load (the clamp does not clamp)"),
        (verdict.current_ok, f"U1's output current into R5 exceeds its "
         f"{format_value(part.output_a, 'A')} rating even at the lightest load"),
        (verdict.power_ok, f"a zener's dissipation exceeds its {zener.power_w:g} W rating even "
         "at the heaviest load"),
        (verdict.design_point, "the zener current cannot lie within "
         f"{DESIGN_CURRENT[0]:g}..{DESIGN_CURRENT[1]:g} times its test current at any load "
         "(the clamp's design point)"),
    )  # fmt: skip
    out = []
    for passed, why in reasons:
        values = [r.value_ohm for r, ok in zip(resistors, passed.tolist(), strict=True) if not ok]
        if values:
            span = f"{format_value(min(values), 'Ω')}..{format_value(max(values), 'Ω')}"
            text = f"with U1 {part.id} and D1/D2 {zener.id}: {len(values)} values ({span})"
            out.append(Exclusion("R5", None, f"{text}: {why}"))
    return out


def opamp_stages(
    start: int,
    opamp: OpAmpAt,
    zeners: Sequence[Diode],
    resistors: Sequence[Resistor],
    load: tuple[LoadRange, LoadRange],
    r3_values: F64,
    rails: Rails,
    turn_v: float,
    deadline: float = math.inf,
) -> tuple[list[ClampStage], list[Exclusion]]:
    """The stages of one op amp over every zener part (D1 = D2) and R5, zener-major in
    catalog order, and the exclusions of the others; those made before ``deadline``
    (``time.perf_counter()``) only."""
    part, model, vh, vl = opamp
    pairs = [(z, z) for z in zeners]
    cols = candidate_columns(model, pairs, [r.value_ohm for r in resistors])
    why = saturation_reasons(cols, (vh, vl), pairs)
    excl = [
        Exclusion("D1", z.id, f"with U1 {part.id}: {w}")
        for z, w in zip(zeners, why, strict=True)
        if w is not None
    ]
    verdict = clamp_limits(cols, load[0], part, (vh, vl), pairs)
    verdict = LimitVerdict(*(x & np.array([w is None for w in why])[:, None] for x in verdict))
    keep_z, keep_r = np.nonzero(verdict.ok)
    kept = {k: v[keep_z, keep_r] for k, v in cols.items()}
    found = design_levels(kept, load[0], rest_levels(kept, load[0], rails), turn_v)
    ve_all = model.offset_v + model.bias_a * np.asarray(r3_values, dtype=float)
    stages: list[ClampStage] = []
    for n, z in enumerate(zeners):
        if why[n] is None:
            excl += limit_exclusions(part, z, resistors, LimitVerdict(*(x[n] for x in verdict)))
    for j, (n, r) in enumerate(zip(keep_z.tolist(), keep_r.tolist(), strict=True)):
        if j % PACE == 0 and time.perf_counter() > deadline:
            break
        ve = ve_all[(found[1][j] - ve_all > 0) & (found[3][j] + ve_all > 0)]
        if len(ve) == 0:
            reason = f"with U1 {part.id}: its Vos + Ib·R3 reaches a clamp level for every R3"
            excl.append(Exclusion("R5", resistors[r].id, reason))
            continue
        levels = [float(x[j]) for x in found]
        ve_range = (float(ve.min()), float(ve.max()))
        at, fixed = start + len(stages), fixed_fields(cols, (n, r))
        stages.append(
            make_stage(at, opamp, pairs[n], resistors[r], load, levels, ve_range, fixed, turn_v)
        )
    return stages, excl


def turn_reach(spec: Spec) -> float:
    """How far the triangle's turns lie past its thresholds in a row the bounds claim (V):
    2·A_max·s/(1 - s), s the spec's largest timing share (``designpoint``)."""
    s = spec.limits.max_timing_share
    return 2.0 * spec.triangle.amplitude_vpp * (1 + spec.triangle.tolerance_pct / 100) * s / (1 - s)


def with_levels(part: OpAmp, spec: Spec) -> OpAmpAt | str:
    """The op amp with its model and output levels on the nominal rails
    (``opamp_levels``), or why it cannot be used."""
    found = opamp_levels(part, spec)
    return found if isinstance(found, str) else (part, *found)


def clamp_stages(
    spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
) -> tuple[list[ClampStage], list[Exclusion]]:
    """Every usable stage in catalog order (op amp, zener, R5) and why each other candidate
    was left out (``searchform`` module docstring); those made before ``deadline`` only
    (``SearchForm.stage_options``)."""
    opamps, excl = stocked_opamps(spec, catalog, lambda _, part: with_levels(part, spec))
    zeners, zener_excl = stocked_zeners(spec, catalog)
    excl += zener_excl
    if not zeners:
        return [], [*excl, Exclusion("D1", None, "no zener of the diode table is stocked")]
    resistors = clamp_resistors(spec, catalog)
    if not resistors or len(r3_values) == 0:
        return [], [*excl, Exclusion("R5", None, "no resistor of the table is eligible")]
    load = loads(spec, resistors, r3_values)
    rails = rails_from_supply(spec.supply)
    stages: list[ClampStage] = []
    for opamp in opamps:
        if time.perf_counter() > deadline:
            break
        made, why = opamp_stages(
            len(stages), opamp, zeners, resistors, load, r3_values, rails, turn_reach(spec),
            deadline,
        )  # fmt: skip
        stages += made
        excl += why
        if not made and time.perf_counter() <= deadline:  # not cut short
            reason = "no zener and R5 of the catalog clamp its square within the limits"
            excl.append(Exclusion("U1", opamp[0].id, reason))
    return stages, excl
