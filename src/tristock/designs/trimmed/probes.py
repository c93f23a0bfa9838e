"""Coverage probes: corners of the analysis's spread box, for necessary conditions of coverage.

Coverage asks every board of the spread box (``tristock.analysis``: the tolerances of R1, R2,
R3, C1 (and a class II band) and RV1, each rail, temperature, the integrator and comparator
offsets ± typical, the bias current 0..2x, slew ±20 %, delay ±30 %) to reach the target with
the wiper inside [m, 1 - m]: the slowest board at wiper m must run at or above the target and
the fastest at 1 - m at or below it. The final check (``trim.checks.coverage``) takes the
extremes over the box. A probe is one corner of that box (every variable at an end of its
range), so the full model at a probe is one of the values the final check bounds: a probe
that misses the target proves the row fails. Probes are only a relaxation, never an
acceptance.

The corners follow the physics' signs (f falls with R1, R3, RV1, C1 and the delay, rises with
R2 and the slew rate; unequal rails slow the loop, T ∝ (VH + VL)²/(VH·VL)):

- ``SLOW_PROBES`` (wiper m): R1, R3, RV1, C1 up, R2 down, slew down, delay up, the rails
  skewed both ways (V+ up with V- down, and the reverse);
- ``FAST_PROBES`` (wiper 1 - m): the opposite parts, the rails scaled together (both up, both
  down: the swing stays as balanced as it is nominally).

Rows are probed at both temperature ends and at every corner of the offset and bias current
(``row_reach``); a pair's window (``pair_windows``) uses one of them: the temperature end that
moves k = R1/R2 the probe's way, offsets +typical, bias 2x.
"""

from __future__ import annotations

import dataclasses
import itertools
from typing import NamedTuple

import numpy as np

from tristock.circuits.opamp_schmitt.searchform import OpAmpStage
from tristock.circuits.opamp_schmitt.spread import BIAS_SPREAD, OFFSET_BOUND
from tristock.circuits.rails import OpAmpModel
from tristock.circuits.searchform import StageLoop, StageOption
from tristock.designs.trimmed.context import F64, I64, TrimContext
from tristock.search.bounds import highest_p, lowest_p
from tristock.search.guarantee import Probe, probe_rails, probe_scales
from tristock.search.model import SearchModel
from tristock.search.rows import RowPrediction

#: Relative slack of every probe comparison: rounding may move a value, never a verdict.
SLACK = 1e-12


class TrimProbe(NamedTuple):
    """One corner: each z in {-1, +1} (a tolerance or rail at its end; slew and delay scaled
    by 1 + spread·z). ``k_up`` names the temperature end used for a pair's window."""

    z1: float
    z2: float
    z3: float
    zc: float
    zrv: float
    v_pos: float
    v_neg: float
    slew: float
    delay: float
    k_up: bool


SLOW_PROBES = (
    TrimProbe(1, -1, 1, 1, 1, 1, -1, -1, 1, True),
    TrimProbe(1, -1, 1, 1, 1, -1, 1, -1, 1, True),
)
FAST_PROBES = (
    TrimProbe(-1, 1, -1, -1, -1, 1, 1, 1, -1, False),
    TrimProbe(-1, 1, -1, -1, -1, -1, -1, 1, -1, False),
)


def temperature_ends(model: SearchModel) -> tuple[float, ...]:
    """The distinct ends of the temperature range (one when the range is a point)."""
    env = model.spec.environment
    return tuple(dict.fromkeys((env.temp_min_c, env.temp_max_c)))


def probe_temperature(model: SearchModel, i1: I64, i2: I64, k_up: bool) -> F64:
    """The end where (tc1 - tc2)·(T - 25 °C), the temperature's move of ln k, is largest
    (``k_up``) or smallest."""
    env = model.spec.environment
    lo, hi = env.temp_min_c, env.temp_max_c
    slope = model.resistors.tempco[i1] - model.resistors.tempco[i2]
    at_lo = slope * (lo - 25.0)
    at_hi = slope * (hi - 25.0)
    first = at_lo >= at_hi if k_up else at_lo <= at_hi
    return np.asarray(np.where(first, lo, hi), dtype=np.float64)


def factor(tol: F64, z: float, tempco: F64, temp: F64 | float, band: F64 | None = None) -> F64:
    """(1 + tol·z)·(1 + band·z)·(1 + tc·1e-6·(T - 25 °C)): a value's factor at a corner."""
    f = (1 + tol * z) * (1 + tempco * 1e-6 * (np.asarray(temp) - 25.0))
    if band is not None:
        f = f * (1 + band * z)
    return np.asarray(f, dtype=np.float64)


def rail_levels(model: SearchModel, u: I64, probe: TrimProbe) -> tuple[F64, F64]:
    """VH, VL on the probe's rails (``SearchForm.level_bounds``; the op-amp Schmitt loop's
    levels do not depend on the row, so the interval's ends agree)."""
    rails = probe_rails(model, Probe(0, 0, 0, 0, probe.v_pos, probe.v_neg, 0, 0, probe.k_up))
    vh, _, vl, _ = model.form.level_bounds(model.stages, u, rails)
    return vh, vl


def corner_models(model: SearchModel, vos_z: float, bias_z: float) -> list[OpAmpModel]:
    """The op amps with both offsets at vos_z·|typical| (comparator +|typical|: it does not
    move the period) and both bias currents at typical·(1 + BIAS_SPREAD·bias_z), the box's
    centre being offsets 0 V and bias as catalogued (``opamp_schmitt.spread.spread_box``)."""
    out = []
    for o in model.opamps:
        vos = abs(o.part.offset_v) * OFFSET_BOUND
        ib = o.part.bias_a * (1 + BIAS_SPREAD * bias_z)
        out.append(
            dataclasses.replace(
                o.model,
                offset_v=vos * vos_z,
                comparator_offset_v=vos,
                bias_a=ib,
                comparator_bias_a=ib,
            )
        )
    return out


def _corners(model: SearchModel) -> list[tuple[float, float]]:
    """(vos_z, bias_z) corners that differ for some op amp of the model."""
    any_vos = any(o.part.offset_v != 0 for o in model.opamps)
    any_ib = any(o.part.bias_a != 0 for o in model.opamps)
    return list(
        itertools.product((-1.0, 1.0) if any_vos else (1.0,), (-1.0, 1.0) if any_ib else (1.0,))
    )


# ---- pair level ----------------------------------------------------------------------------


class PairProbes(NamedTuple):
    """Per pair, at the slow and fast corners: k there, the temperature used, and the P bound
    (P_slow ≤ p_slow_max for both slow corners, P_fast ≥ p_fast_min for both fast ones)."""

    k_slow: F64
    t_slow: F64
    p_slow_max: F64
    k_fast: F64
    t_fast: F64
    p_fast_min: F64


def r_eff_range(ctx: TrimContext, probe: TrimProbe, temp: F64) -> tuple[F64, F64]:
    """Smallest and largest R3 + α·RV1 (α in [0, 1]) at the probe over every eligible part."""
    res, pots = ctx.model.resistors, ctx.pots
    lo = np.full(len(temp), np.inf)
    hi = np.zeros(len(temp))
    for t in np.unique(temp):
        r3 = res.value * factor(res.tol, probe.z3, res.tempco, t)
        rv = pots.value * factor(pots.tol, probe.zrv, pots.tempco, t)
        at = temp == t
        lo[at] = r3.min()
        hi[at] = r3.max() + rv.max()
    return lo, hi


def corner_stages(model: SearchModel, vos_z: float, bias_z: float) -> list[StageOption]:
    """The stage options with ``corner_models``' op amps in place of the catalogued ones."""
    out: list[StageOption] = []
    for o, m in zip(model.opamps, corner_models(model, vos_z, bias_z), strict=True):
        stage = o.option
        if not isinstance(stage, OpAmpStage):
            raise TypeError(f"U1: stage {stage.key} is not an op-amp Schmitt stage")
        out.append(dataclasses.replace(stage, model=m))
    return out


def probe_loop(ctx: TrimContext, u: I64, probe: TrimProbe, temp: F64) -> StageLoop:
    """The op amps' loops at the probe (rails, slew, delay; offsets +typical, bias 2x) with the
    integrator error voltage Ve = Vos1 + Ib1·R_eff over every R_eff a row can have there."""
    model = ctx.model
    vh, vl = rail_levels(model, u, probe)
    slew, delay = probe_scales(Probe(0, 0, 0, 0, 0, 0, probe.slew, probe.delay, False))
    ms = corner_models(model, 1.0, 1.0)
    vos = np.array([m.offset_v for m in ms])[u]
    ib = np.array([m.bias_a for m in ms])[u]
    r_lo, r_hi = r_eff_range(ctx, probe, temp)
    ve_a, ve_b = vos + ib * r_lo, vos + ib * r_hi
    loop = model.loops(u)
    return loop._replace(
        vh_lo=vh,
        vh_hi=vh,
        vl_lo=vl,
        vl_hi=vl,
        slew_rise=loop.slew_rise * slew,
        slew_fall=loop.slew_fall * slew,
        delay=loop.delay * delay,
        ve_lo=np.minimum(ve_a, ve_b),
        ve_hi=np.maximum(ve_a, ve_b),
    )


def distinct_rows(*columns: F64) -> tuple[I64, I64]:
    """One position of each distinct row of the columns (bit for bit) and the row's class at
    every position: ``first[inverse]`` picks, for each position, a row equal to its own."""
    if len(columns[0]) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    _, first, inverse = np.unique(
        np.stack(columns).T, axis=0, return_index=True, return_inverse=True
    )
    return np.asarray(first, dtype=np.int64), np.asarray(inverse, dtype=np.int64).reshape(-1)


def pair_windows(ctx: TrimContext, u: I64, i1: I64, i2: I64) -> PairProbes:
    """P bounds at the slow and fast corners for every row through each (U1, R1, R2) pair.

    At a probe the period bounds of ``search.bounds`` rise with P, so a slow corner reaches the
    target (T ≤ T_target) only when its P is at most ``highest_p`` at T_target, and a fast
    corner stays at or below it (T ≥ T_target) only when its P is at least ``lowest_p``.
    """
    res = ctx.model.resistors
    t_target = ctx.target_period_s
    out: list[tuple[F64, F64, F64]] = []
    for probes, k_up in ((SLOW_PROBES, True), (FAST_PROBES, False)):
        temp = probe_temperature(ctx.model, i1, i2, k_up)
        p0 = probes[0]
        r1 = res.value[i1] * factor(res.tol[i1], p0.z1, res.tempco[i1], temp)
        r2 = res.value[i2] * factor(res.tol[i2], p0.z2, res.tempco[i2], temp)
        kp = r1 / r2
        # the bounds depend on (U1, k at the corner, temperature) only: each distinct once
        first, inv = distinct_rows(u.astype(np.float64), kp, temp)
        target = np.full(len(first), t_target)
        bounds = []
        for probe in probes:
            loop = probe_loop(ctx, u[first], probe, temp[first])
            if k_up:
                bounds.append(highest_p(loop, kp[first], target * (1 + SLACK)))
            else:
                bounds.append(lowest_p(loop, kp[first], target * (1 - SLACK)))
        p = np.minimum(*bounds) if k_up else np.maximum(*bounds)
        out.append((kp, temp, np.asarray(p, dtype=np.float64)[inv]))
    (k_s, t_s, p_s), (k_f, t_f, p_f) = out
    return PairProbes(k_s, t_s, p_s, k_f, t_f, p_f)


# ---- row level -----------------------------------------------------------------------------


def row_reach(
    ctx: TrimContext, u: I64, i1: I64, i2: I64, i3: I64, j: I64, v: I64
) -> tuple[F64, F64]:
    """(lowest f of the slow corners at wiper m, highest f of the fast corners at 1 - m) per
    row, over both temperature ends and every offset and bias corner; a corner where the loop
    cannot oscillate counts as missing the target (-inf and +inf)."""
    model, pots = ctx.model, ctx.pots
    res, cap = model.resistors, model.capacitors
    m = ctx.margin
    n = len(u)
    # every (probe, temperature) of both kinds stacked along the rows, one model call a corner
    blocks: list[tuple[F64, ...]] = []
    is_slow: list[bool] = []
    for probes, wiper, slow_kind in ((SLOW_PROBES, m, True), (FAST_PROBES, 1 - m, False)):
        for probe in probes:
            vh, vl = rail_levels(model, u, probe)
            slew, delay = probe_scales(Probe(0, 0, 0, 0, 0, 0, probe.slew, probe.delay, False))
            for temp in temperature_ends(model):
                r1 = res.value[i1] * factor(res.tol[i1], probe.z1, res.tempco[i1], temp)
                r2 = res.value[i2] * factor(res.tol[i2], probe.z2, res.tempco[i2], temp)
                r3 = res.value[i3] * factor(res.tol[i3], probe.z3, res.tempco[i3], temp)
                rv = pots.value[v] * factor(pots.tol[v], probe.zrv, pots.tempco[v], temp)
                c = cap.value[j] * factor(
                    cap.tol[j], probe.zc, cap.tempco[j], temp, cap.extra_band[j]
                )
                scales = (np.full(n, slew), np.full(n, delay))
                blocks.append((r1, r2, r3 + wiper * rv, c, vh, vl, *scales))
                is_slow.append(slow_kind)
    stacked = (np.concatenate(x) for x in zip(*blocks, strict=True))
    r1, r2, r_eff, c, vh, vl, slew_s, delay_s = stacked
    uu = np.tile(u, len(blocks))
    slow_rows = np.repeat(np.asarray(is_slow), n)
    slow = np.full(len(uu), np.inf)
    fast = np.full(len(uu), -np.inf)
    for vz, bz in _corners(model):
        rp = RowPrediction(model.form, corner_stages(model, vz, bz), uu, (r1, r2, r_eff, c),
                           vh, vl, slew_scale=slew_s, delay_scale=delay_s)  # fmt: skip
        f = np.asarray(rp.pred.frequency_hz, dtype=np.float64)
        slow = np.fmin(slow, np.where(rp.valid, f, -np.inf))
        fast = np.fmax(fast, np.where(rp.valid, f, np.inf))
    lowest = np.fmin.reduce(np.where(slow_rows, slow, np.inf).reshape(len(blocks), n))
    highest = np.fmax.reduce(np.where(slow_rows, -np.inf, fast).reshape(len(blocks), n))
    return lowest, highest


def probes_pass(ctx: TrimContext, slow: F64, fast: F64) -> np.ndarray:
    """Rows whose probes do not prove a miss (with ``SLACK``)."""
    f_t = ctx.target_hz
    return np.asarray((slow >= f_t * (1 - SLACK)) & (fast <= f_t * (1 + SLACK)))
