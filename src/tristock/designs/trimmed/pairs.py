"""(U1, R1, R2) pairs of the trimmed search and their P bounds.

The nominal board must meet the target at a wiper α0 in [m, 1 - m]; its P0 = k·R_eff·C1
(k = R1/R2, R_eff = R3 + α0·RV) then lies in ``search.bounds.window`` at the target period,
[P_lo, P_hi], for any integrator error voltage Ve = Vos1 + Ib1·R_eff its R_eff can give, and
inside what the tables can make. Over that range the amplitude bounds must reach the
amplitude band and the timing-share floor must be within ``limits.max_timing_share``
(acceptance at α0, ``trim.rows``), else no row through the pair is accepted. Each kept pair
also carries the P bounds of its probe corners (``trim.probes.pair_windows``) and the op-amp
terms of the resolution bound (``trim.cells``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import StageLoop
from tristock.designs.pacing import Paced
from tristock.designs.trimmed.context import F64, I64, TrimContext
from tristock.designs.trimmed.probes import SLACK, PairProbes, distinct_rows, pair_windows
from tristock.search.bounds import (
    amplitude_bounds,
    claimed,
    timing_share_floor,
    window,
)

#: Windows are widened by this relative amount so rounding never drops a row on an edge.
EDGE = 1e-9
#: Pairs whose windows are sought in one vectorised step (the deadline is checked between).
PAIR_CHUNK = 2048
#: The first step's size when little time is left (``pacing``): a step of ``PAIR_CHUNK``
#: takes 0.1-0.3 s on the demo, mostly per step, and would overrun a short limit.
FIRST_PAIR_CHUNK = 256
#: Pairs screened (amplitude and share over the catalog-wide P range) in one step.
SCREEN_CHUNK = 8192
FIRST_SCREEN_CHUNK = 1024


@dataclass
class Pairs:
    """(U1, R1, R2) pairs that can meet the amplitude band and the timing limit, with the P
    bounds of their rows (module docstring) and the op-amp terms of the resolution bound."""

    u: I64
    i1: I64
    i2: I64
    k: F64
    p_lo: F64
    p_hi: F64
    k_slow: F64
    t_slow: F64
    p_slow_max: F64
    k_fast: F64
    t_fast: F64
    p_fast_min: F64
    span: F64
    ab_max: F64
    bias: F64
    cost: F64  # U1 + R1 + R2 per board

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> Pairs:
        return Pairs(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})

    def __len__(self) -> int:
        return len(self.u)


def nominal_loop(ctx: TrimContext, u: I64) -> StageLoop:
    """Each op amp's nominal loop with Ve = Vos1 + Ib1·R_eff over every R_eff = R3 + α·RV a
    row can have (the model's own loop covers R3 alone)."""
    res, pots = ctx.model.resistors, ctx.pots
    loop = ctx.model.loops(u)
    r_lo = float(res.value.min())
    r_hi = float(res.value.max() + (pots.value.max() if len(pots) else 0.0))
    vos = np.array([o.model.offset_v for o in ctx.model.opamps])[u]
    ib = np.array([o.model.bias_a for o in ctx.model.opamps])[u]
    ve_a, ve_b = vos + ib * r_lo, vos + ib * r_hi
    return loop._replace(ve_lo=np.minimum(ve_a, ve_b), ve_hi=np.maximum(ve_a, ve_b))


def largest_drive_product(loop: StageLoop) -> F64:
    """max (VH - Ve)·(VL + Ve) over Ve in [ve_lo, ve_hi] (concave: the vertex, clipped); the
    op-amp Schmitt loop's levels do not depend on the row (``vh_lo`` = ``vh_hi``)."""
    vh, vl = loop.vh_lo, loop.vl_lo
    ve = np.clip((vh - vl) / 2, loop.ve_lo, loop.ve_hi)
    return np.asarray((vh - ve) * (vl + ve), dtype=np.float64)


def _pair_indices(ctx: TrimContext) -> tuple[I64, I64, I64]:
    """Every (U1, R1, R2) with k inside the op amp's ``k_range`` and the masks."""
    model = ctx.model
    ln_r = model.resistors.ln_value
    use_u = model.allows("U1", len(model.opamps))
    use_r1 = model.allows("R1", len(ln_r))
    use_r2 = model.allows("R2", len(ln_r))
    us, i1s, i2s = [], [], []
    for o in model.opamps:
        if not use_u[o.index]:
            continue
        k_lo, k_hi = o.k_range
        lo = np.searchsorted(ln_r, ln_r - math.log(k_hi) - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r - math.log(k_lo) + 1e-12, side="right")
        counts = np.maximum(hi - lo, 0)
        i1 = np.repeat(np.arange(len(ln_r), dtype=np.int64), counts)
        i2 = (
            np.repeat(lo, counts)
            + np.arange(len(i1))
            - np.repeat(np.cumsum(counts) - counts, counts)
        )
        keep = use_r1[i1] & use_r2[i2]
        us.append(np.full(int(keep.sum()), o.index, dtype=np.int64))
        i1s.append(i1[keep])
        i2s.append(i2[keep].astype(np.int64))
    if not us:
        z = np.zeros(0, dtype=np.int64)
        return z, z, z
    return np.concatenate(us), np.concatenate(i1s), np.concatenate(i2s)


def build_pairs(ctx: TrimContext, deadline: float) -> tuple[Pairs, bool]:
    """Pairs that can meet the amplitude band and the timing limit at the target (module
    docstring), with their nominal and probe P bounds; False when the deadline cut the
    listing (the pairs are then incomplete)."""
    model, spec = ctx.model, ctx.spec
    res, cap, pots = model.resistors, model.capacitors, ctx.pots
    u, i1, i2 = _pair_indices(ctx)
    if len(u) == 0 or len(cap) == 0 or len(pots) == 0:
        return _no_pairs(), True
    k = res.value[i1] / res.value[i2]
    loop = nominal_loop(ctx, u)
    t_t = ctx.target_period_s
    m = ctx.margin
    # P0 = k·(R3 + α0·RV)·C1 with α0 in [m, 1 - m]: what the tables can make at all; and,
    # before any root is sought, the ideal-switch part T_i = span²·P/(a·b) of the period,
    # at most T_t and at least (1 - max_timing_share)·T_t.
    vh, vl = loop.vh_lo, loop.vl_lo  # the op-amp loop's levels: equal interval ends
    span = vh + vl
    ab_lo = np.minimum((vh - loop.ve_lo) * (vl + loop.ve_lo),
                       (vh - loop.ve_hi) * (vl + loop.ve_hi))  # fmt: skip
    share_max = spec.limits.max_timing_share
    p_lo = np.maximum(
        k * (res.value.min() + m * pots.value.min()) * cap.value.min(),
        (1 - share_max) * t_t * ab_lo / span**2 * (1 - EDGE),
    )
    p_hi = np.minimum(
        k * (res.value.max() + (1 - m) * pots.value.max()) * cap.value.max(),
        t_t * largest_drive_product(loop) / span**2 * (1 + EDGE),
    )
    # Pairs of one op amp and one ratio share every P bound below: work on the distinct ones.
    first, inv = distinct_rows(u.astype(np.float64), k)
    ok, p_lo, p_hi = _ratio_windows(ctx, loop.take(first), k[first], p_lo[first], p_hi[first],
                                    deadline)  # fmt: skip
    if ok is None:
        return _no_pairs(), False
    sel = np.flatnonzero(ok[inv])
    u, i1, i2, k, cls = u[sel], i1[sel], i2[sel], k[sel], inv[sel]
    steps = Paced(len(sel), deadline, full=PAIR_CHUNK, first=FIRST_PAIR_CHUNK)
    parts = [pair_windows(ctx, u[step], i1[step], i2[step]) for step in steps]
    if steps.cut:
        return _no_pairs(), False
    probes = (
        PairProbes(*(np.concatenate(f) for f in zip(*parts, strict=True)))
        if parts
        else PairProbes(*(np.zeros(0) for _ in PairProbes._fields))
    )
    model, loop = ctx.model, loop.take(sel)
    u_cost = np.array([o.part.cost_per_board for o in model.opamps])[u]
    bias = np.abs(np.array([o.model.bias_a for o in model.opamps])[u])
    return Pairs(
        u,
        i1,
        i2,
        k,
        p_lo[cls],
        p_hi[cls],
        *probes,
        span=np.asarray(loop.span_lo, dtype=np.float64),
        # the resolution bound rests on the edge's monotone mean time (search.bounds): where
        # that is not claimed, a·b "unbounded" makes the bound 0, which every row meets
        ab_max=np.where(claimed(loop, k), largest_drive_product(loop), np.inf),
        bias=bias,
        cost=u_cost + res.cost[i1] + res.cost[i2],
    ), True


def _ratio_windows(
    ctx: TrimContext, loop: StageLoop, k: F64, p_lo: F64, p_hi: F64, deadline: float
) -> tuple[NDArray[np.bool_] | None, F64, F64]:
    """For each (op amp, ratio): whether the amplitude and share can be met over the tables'
    P range, then over the exact window at the target, and that window (cut to the tables'
    range); None when the deadline came first. In paced steps (``pacing``)."""
    ok = np.zeros(len(k), dtype=bool)
    screen = Paced(len(k), deadline, full=SCREEN_CHUNK, first=FIRST_SCREEN_CHUNK)
    for s in screen:
        n = np.arange(s.start, s.stop)
        ok[n] = _amplitude_and_share(ctx, loop.take(n), k[n], p_lo[n], p_hi[n])
    if screen.cut:
        return None, p_lo, p_hi
    sel = np.flatnonzero(ok)
    p_lo, p_hi = p_lo.copy(), p_hi.copy()
    t_t = ctx.target_period_s
    steps = Paced(len(sel), deadline, full=PAIR_CHUNK, first=FIRST_PAIR_CHUNK)
    for step in steps:
        n = sel[step]
        part = loop.take(n)
        w = window(part, k[n], np.full(len(n), t_t * (1 - SLACK)),
                   np.full(len(n), t_t * (1 + SLACK)))  # fmt: skip
        p_lo[n], p_hi[n] = np.maximum(p_lo[n], w.lo), np.minimum(p_hi[n], w.hi)
        ok[n] = _amplitude_and_share(ctx, part, k[n], p_lo[n], p_hi[n])
    if steps.cut:
        return None, p_lo, p_hi
    return ok, p_lo, p_hi


def _amplitude_and_share(
    ctx: TrimContext, loop: StageLoop, k: F64, p_lo: F64, p_hi: F64
) -> NDArray[np.bool_]:
    """Pairs whose P range is not empty and over which the amplitude bounds reach the band
    and the timing-share floor is within the limit (``search.bounds``)."""
    spec = ctx.spec
    amp = amplitude_bounds(loop, k, p_lo, p_hi)
    share = timing_share_floor(loop, k, p_lo, p_hi)
    aa, ab = ctx.model.band_a
    a_t = spec.triangle.amplitude_vpp
    with np.errstate(invalid="ignore", divide="ignore"):
        keep = p_lo <= p_hi * (1 + EDGE)
        keep &= (np.log(amp.hi / a_t) >= aa - SLACK) & (np.log(amp.lo / a_t) <= ab + SLACK)
        keep &= share <= spec.limits.max_timing_share + SLACK
    return np.asarray(keep)


def _no_pairs() -> Pairs:
    z = np.zeros(0, dtype=np.int64)
    f = np.zeros(0)
    return Pairs(z, z, z, f, f, f, f, f, f, f, f, f, f, f, f, f)
