"""The exact search of a loop with two integrator elements (the set-duty loop): rows
(stage, R1, R2, R3A, R3B, C1), listed through windows no accepted row lies outside, scored
by the full model (``search.branchrows``) in order of a lower bound of their score.

Notation (per row, SI units): k = R1/R2, span = VH + VL, H = k·span the thresholds'
distance; g_A = I_A - Ib1 and g_B = I_B + Ib1 the ideal ramps' currents (``ramp_currents``:
each a function of the stage and its own resistor only); h = C1·H/g_A and l = C1·H/g_B the
ideal ramp times, T_i = h + l the model's ideal period. The full model (``duty_schmitt
.physics``) gives t_bottom = (C1·H + i_b·t_b2 + i_a·t_a2)/(i_a - Ib1) and t_top = (C1·H +
i_a·t_a1 + i_b·t_b1)/(i_b + Ib1) with i = I/(1 + ε) ≤ I and step times t ≥ 0, the period
T = t_top + t_bottom, the high time t_bottom + m_f - m_r (m the edges' mid-swing times) and
the amplitude H + (i_b·t_b2 + i_a·t_a1)/C1. Hence, for every row:

- (B1) t_bottom ≥ h and t_top ≥ l, so T ≥ T_i, and E = T - T_i = (t_bottom - h) + (t_top - l)
  with both parts at least 0;
- (B2) the amplitude lies in [H, H·(1 + E/min(h, l))]: i_a·t_a1 ≤ (i_b + Ib1)·t_top - C1·H
  ≤ g_B·t_top - C1·H = g_B·(t_top - l), and likewise for the bottom;
- (B3) each ramp's slope is at least H/T (from (B1)'s formulas), so a row with T ≤ 1/f_lo has
  both slopes at least H·f_lo, and its mid-swing times lie between the delay and their value
  at that slope (L1, ``SearchForm.mid_swing_spread``): |m_f - m_r| ≤ Δ;
- (B4) every step time is at least the transport delay td (L2, tests/circuits/
  test_duty_searchform.py) and i ≥ I/(1 + ε) with ε ≤ 1/(ωt·R·C1), so E ≥ E_lo =
  td·(i_a + i_b)·(1/g_A + 1/g_B) (``_least_excess``).

An accepted row has T in [1/f_hi, 1/f_lo], a timing share 1 - T_i/T ≤ s (so E ≤ s·T and
T_i ≤ T ≤ T_i/(1 - s)) and its duty d in [d_lo, d_hi]. With t_bottom = d·T - (m_f - m_r):

- h ≤ t_bottom ≤ d_hi·T + Δ ≤ d_hi·T_i/(1 - s) + Δ, and h ≥ t_bottom - E ≥ (d_lo - s)·T - Δ;
- l ≤ t_top = (1 - d)·T + (m_f - m_r) ≤ (1 - d_lo)·T_i/(1 - s) + Δ, and l ≥ (1 - d_hi - s)·T - Δ;
- T_i in [(1 - s)/f_hi, 1/f_lo], E_lo ≤ s·T_i/(1 - s) and T_i + E_lo ≤ 1/f_lo; the
  amplitude's band needs H ≤ A_hi and
  H·(1 + s·T_i/((1 - s)·min(h, l))) ≥ A_lo.

With T in [1/f_hi, 1/f_lo] these give h and l windows per (stage, pair), so g_A and g_B
windows per (stage, pair, C1): index ranges of the stage's resistors sorted by g. Every row of
those ranges meeting the conditions above is scored unless a lower bound of its score (its
parts' exact terms, the frequency error over T in [T_i + E_lo, T_i/(1 - s)] and the amplitude error
over (B2)'s range) exceeds the ``top``-th score found. Every row scored is held to (B1)-(B3) at
run time: a violation withdraws the proof. Where (L1) is not claimed (a scaled mid level
below ``LEVEL_TIME_MIN``) Δ is the whole period 1/f_lo.
"""

from __future__ import annotations

import math
import time
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.search.branchrows import (
    best,
    concat,
    duty_target,
    empty_branch_rows,
    evaluate,
    part_scores,
    row_cost,
)
from tristock.search.enumeration import EngineResult
from tristock.search.model import SearchModel

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]

#: Rows gathered before one batch of full-model evaluations.
OPEN_BATCH = 20_000
#: Relative slack of the run-time guard (rounding in the model's sums).
GUARD_SLACK = 1e-9


class _Limits:
    """The spec's bands as the windows need them (module docstring)."""

    def __init__(self, model: SearchModel) -> None:
        spec = model.spec
        f_t, a_t = spec.target.target_hz, spec.triangle.amplitude_vpp
        (fa, fb), (aa, ab) = model.band_f, model.band_a
        self.f_lo, self.f_hi = f_t * math.exp(fa), f_t * math.exp(fb)
        self.a_lo, self.a_hi = a_t * math.exp(aa), a_t * math.exp(ab)
        self.s = spec.limits.max_timing_share
        _, self.d_lo, self.d_hi = duty_target(spec)
        self.f_t, self.a_t = f_t, a_t

    def windows(self, delta: F64) -> tuple[F64, F64, F64, F64]:
        """(h_lo, h_hi, l_lo, l_hi) over T in [1/f_hi, 1/f_lo], with Δ = ``delta``."""

        def least(d: float) -> float:  # (d - s)·T at its smallest
            return (d - self.s) / (self.f_hi if d >= self.s else self.f_lo)

        return (
            least(self.d_lo) - delta,
            self.d_hi / self.f_lo + delta,
            least(1 - self.d_hi) - delta,
            (1 - self.d_lo) / self.f_lo + delta,
        )

    def least_period_share(self, d: float, ideal: F64) -> F64:
        """(d - s)·T over T in [T_i, T_i/(1 - s)], at its smallest."""
        scale = 1.0 if d >= self.s else 1.0 / (1.0 - self.s)
        return np.asarray((d - self.s) * ideal * scale)


def _range(sorted_g: F64, lo: F64, hi: F64) -> tuple[I64, I64]:
    """Index ranges [first, stop) of ``sorted_g`` within [lo, hi] (widened by 1e-12)."""
    first = np.searchsorted(sorted_g, lo * (1 - 1e-12), "left")
    stop = np.searchsorted(sorted_g, hi * (1 + 1e-12), "right")
    return np.asarray(first, dtype=np.int64), np.asarray(np.maximum(stop, first), dtype=np.int64)


def _spread(first: I64, stop: I64) -> tuple[I64, I64]:
    """Every (owner, position) of the owners' ranges [first, stop)."""
    counts = stop - first
    owner = np.repeat(np.arange(len(counts)), counts)
    offset = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
    return owner, first[owner] + offset


class _Walk:
    """The scoring state: the best rows so far, the bound they set, the pending rows."""

    def __init__(self, model: SearchModel, top: int, deadline: float, coupled: bool) -> None:
        self.model, self.top, self.deadline, self.coupled = model, top, deadline, coupled
        self.kept = empty_branch_rows()
        self.pending: list[tuple[Any, ...]] = []
        self.count = 0
        self.evaluated = self.scored = 0
        self.cut = False
        #: R1 and R2 of every divider pair (``branch_top``'s pair list).
        self.pair_codes: tuple[I64, I64] = (np.zeros(0, np.int64), np.zeros(0, np.int64))

    @property
    def theta(self) -> int | None:
        """The ``top``-th best primary score so far (None: fewer rows kept)."""
        return int(self.kept.primary[-1]) if len(self.kept) >= self.top else None

    def add(self, columns: tuple[Any, ...]) -> None:
        self.pending.append(columns)
        self.count += len(columns[0])
        if self.count >= OPEN_BATCH:
            self.flush()

    def flush(self) -> None:
        if not self.pending:
            return
        cols = [np.concatenate([p[n] for p in self.pending]) for n in range(len(self.pending[0]))]
        self.pending, self.count = [], 0
        u, i1, i2, i3, i4, j, least, bounds = *cols[:7], np.stack(cols[7:], axis=1)
        theta = self.theta
        live = np.flatnonzero(least <= theta) if theta is not None else np.arange(len(u))
        self.evaluated += len(u)
        self.scored += len(live)
        if time.perf_counter() > self.deadline:
            self.cut = True
        if len(live) == 0:
            return
        sel = (x[live] for x in (u, i1, i2, i3, i4, j))
        found, figures = evaluate(self.model, *sel, coupled=self.coupled)
        _guard(self.model, figures, bounds[live])
        self.kept = best(self.model, concat([self.kept, found]), self.top)


def _guard(model: SearchModel, figures: F64, bounds: F64) -> None:
    """Hold every scored row that the windows' argument covers (it oscillates, its share is
    within the limit and T ≤ 1/f_lo) to (B1)-(B4); a violation withdraws the proof."""
    period, high, amp = figures[:, 0], figures[:, 1], figures[:, 2]
    h, l_, big_h, delta, e_lo = (bounds[:, n] for n in range(5))
    ideal = h + l_
    s = model.spec.limits.max_timing_share
    f_lo = model.spec.target.target_hz * math.exp(model.band_f[0])
    with np.errstate(invalid="ignore"):
        covered = np.isfinite(period) & (1 - ideal / period <= s) & (period * f_lo <= 1 + 1e-12)
        e = period - ideal
        tol = GUARD_SLACK * period
        ok = e >= e_lo - tol
        ok &= (high - h >= -delta - tol) & (high - h <= e + delta + tol)
        ok &= (amp >= big_h * (1 - GUARD_SLACK)) & (
            amp <= big_h * (1 + e / np.minimum(h, l_)) * (1 + GUARD_SLACK)
        )
    if not np.all(ok[covered]):
        model.bounds_violated = True


def _least(
    model: SearchModel, lim: _Limits, ideal: F64, e_lo: F64, big_h: F64, shortest: F64
) -> I64:
    """A lower bound of each row's frequency and amplitude terms: T in [T_i + E_lo,
    T_i/(1 - s)], the amplitude in [H, H·(1 + s·T_i/((1 - s)·min(h, l)))]."""
    s = lim.s
    with np.errstate(divide="ignore"):
        f_hi, f_lo = 1.0 / (ideal + e_lo), (1 - s) / ideal
        e_f = np.maximum(np.maximum(np.log(f_lo / lim.f_t), -np.log(f_hi / lim.f_t)), 0.0)
        a_top = big_h * (1 + s * ideal / ((1 - s) * shortest))
        e_a = np.maximum(np.maximum(np.log(big_h / lim.a_t), -np.log(a_top / lim.a_t)), 0.0)
    terms = model.frequency_term(e_f) + model.amplitude_term(e_a) - 2
    return np.asarray(np.maximum(terms, 0), dtype=np.int64)


def branch_top(
    model: SearchModel, top: int, time_limit_s: float, *, coupled: bool = True
) -> EngineResult:
    """The ``top`` best rows in rank order, proven when every window was listed in time and
    no scored row broke the bounds (module docstring)."""
    start = time.perf_counter()
    walk = _Walk(model, top, start + time_limit_s, coupled)
    lim = _Limits(model)
    res, cap = model.resistors, model.capacitors
    n_res = len(res.value)
    i1, i2 = (x.ravel() for x in np.meshgrid(
        np.flatnonzero(model.allows("R1", n_res)), np.flatnonzero(model.allows("R2", n_res)),
        indexing="ij",
    ))  # fmt: skip
    walk.pair_codes = (i1, i2)
    k = res.value[i1] / res.value[i2]
    pair_terms = model.resistor_term(i1) + model.resistor_term(i2)
    caps = np.flatnonzero(model.allows("C1", len(cap.value)))
    caps = caps[np.argsort(model.capacitor_term(caps), kind="stable")]
    credit = 3 * model.shared_line_credit()
    stages_allowed = model.allows("U1", len(model.opamps))
    for o in model.opamps:
        if walk.cut:
            break
        u = o.index
        if not stages_allowed[u]:
            continue
        found = _stage_rows(model, lim, u, i1, i2, k)
        if found is None:
            continue
        pairs, a_sorted, b_sorted = found
        ga = a_sorted[1]
        least_parts = model.stage_terms[u] + pair_terms[pairs.index] + a_sorted[2] + b_sorted[2]
        for j in caps.tolist():
            if time.perf_counter() > walk.deadline:
                walk.cut = True
                break
            theta = walk.theta
            c1 = float(cap.value[j])
            base = least_parts + int(model.capacitor_term(np.array([j]))[0]) - credit
            live = np.flatnonzero(base <= theta) if theta is not None else np.arange(len(base))
            h_lo, h_hi, l_lo, l_hi = pairs.windows[:, live]
            q = c1 * pairs.big_h[live]
            with np.errstate(divide="ignore"):
                a0, a1 = _range(ga, q / h_hi, np.where(h_lo > 0, q / h_lo, np.inf))
            group, pa = _spread(a0, a1)
            if len(group) == 0:
                continue
            rows_a = (live[group], q[group], pa, l_lo[group], l_hi[group])
            _open(model, lim, walk, u, pairs, j, rows_a, a_sorted, b_sorted)
            if walk.cut:
                break
    if not walk.cut:
        walk.flush()
    proven = not walk.cut and not model.bounds_violated
    elapsed = time.perf_counter() - start
    return EngineResult(walk.kept, proven, walk.evaluated, elapsed, walk.scored)


class _Pairs:
    """The divider pairs a stage's rows can use: their index into the pair list, H, Δ and the
    (h, l) windows, (4, n)."""

    def __init__(self, index: I64, big_h: F64, delta: F64, windows: F64) -> None:
        self.index, self.big_h, self.delta, self.windows = index, big_h, delta, windows


def _stage_rows(
    model: SearchModel, lim: _Limits, u: int, i1: I64, i2: I64, k: F64
) -> tuple[_Pairs, tuple[I64, F64, int], tuple[I64, F64, int]] | None:
    """Stage ``u``'s pairs (the amplitude band's H conditions) and its resistors for R3A and
    R3B sorted by their ramp current (index, g, score term), or None when it has none."""
    form, res = model.form, model.resistors
    vh, vl = model.stages[u].levels
    span = vh + vl
    big_h = k * span
    stage = np.full(len(k), u, dtype=np.int64)
    delta, claimed = form.mid_swing_spread(model.stages, stage, k, big_h * lim.f_lo, model.rails)
    # where (L1) is not claimed: m_f - m_r = high - t_bottom, both in [0, T], T ≤ 1/f_lo
    delta = np.where(claimed, delta, 1.0 / lim.f_lo)
    windows = np.stack(lim.windows(delta))
    shortest = np.minimum(windows[0], windows[2])
    # (B2) with E ≤ s·T ≤ s/f_lo and min(h, l) at least the windows' lower ends
    reach = np.where(shortest > 0, 1 + lim.s / (np.maximum(shortest, 1e-300) * lim.f_lo), np.inf)
    keep = np.flatnonzero((big_h <= lim.a_hi * (1 + 1e-12)) & (big_h * reach >= lim.a_lo))
    if len(keep) == 0:
        return None
    n_res = len(res.value)
    ga, gb = form.ramp_currents(model.stages, np.full(n_res, u), res.value, model.rails)
    terms = model.resistor_term(np.arange(n_res))

    def table(g: F64, designator: str) -> tuple[I64, F64, int]:
        idx = np.flatnonzero(model.allows(designator, n_res) & (g > 0))
        idx = idx[np.argsort(g[idx], kind="stable")]
        return idx, g[idx], int(terms[idx].min()) if len(idx) else 0

    a_sorted, b_sorted = table(ga, "R3A"), table(gb, "R3B")
    if len(a_sorted[0]) == 0 or len(b_sorted[0]) == 0:
        return None
    return _Pairs(keep, big_h[keep], delta[keep], windows[:, keep]), a_sorted, b_sorted


def _open(
    model: SearchModel,
    lim: _Limits,
    walk: _Walk,
    u: int,
    pairs: _Pairs,
    j: int,
    rows_a: tuple[I64, F64, I64, F64, F64],
    a: tuple[I64, F64, int],
    b: tuple[I64, F64, int],
) -> None:
    """Hand the rows of one C1's windows that meet the module's conditions, with their lower
    bounds, to the walk. ``rows_a`` holds, per (pair, R3A) in the windows, the pair, C1·H,
    R3A's position in ``a`` and the pair's l window; R3B's range for each follows from the
    conditions that bound l given h (T_i's band; h ≤ d_hi·T_i/(1 - s) + Δ; and, for
    d_lo > s, l ≤ (1 - d_lo)·T_i/(1 - s) + Δ), then every condition is applied per row."""
    s, d_lo, d_hi = lim.s, lim.d_lo, lim.d_hi
    sel, q, pa, l_lo, l_hi = rows_a
    (a_idx, ga, _), (b_idx, gb, _) = a, b
    h, delta = q / ga[pa], pairs.delta[sel]
    l_lo = np.maximum(l_lo, (1 - s) / lim.f_hi - h)
    l_lo = np.maximum(l_lo, (h - delta) * (1 - s) / d_hi - h)
    l_hi = np.minimum(l_hi, 1 / lim.f_lo - h)
    if d_lo > s:
        l_hi = np.minimum(l_hi, ((1 - d_lo) * h / (1 - s) + delta) * (1 - s) / (d_lo - s))
    with np.errstate(divide="ignore", invalid="ignore"):
        b0, b1 = _range(gb, q / l_hi, np.where(l_lo > 0, q / l_lo, np.inf))
    b1 = np.where(l_hi >= l_lo, b1, b0)
    owner, pb = _spread(b0, b1)
    if len(owner) == 0:
        return
    sel, q, pa, h, delta = sel[owner], q[owner], pa[owner], h[owner], delta[owner]
    l_ = q / gb[pb]
    ideal = h + l_
    big_h = pairs.big_h[sel]
    shortest = np.minimum(h, l_)
    ok = (ideal >= (1 - s) / lim.f_hi * (1 - 1e-12)) & (ideal <= 1 / lim.f_lo * (1 + 1e-12))
    ok &= h <= d_hi * ideal / (1 - s) + delta
    ok &= h >= lim.least_period_share(d_lo, ideal) - delta
    ok &= l_ <= (1 - d_lo) * ideal / (1 - s) + delta
    ok &= l_ >= lim.least_period_share(1 - d_hi, ideal) - delta
    ok &= big_h * (1 + s * ideal / ((1 - s) * shortest)) >= lim.a_lo * (1 - 1e-12)
    e_lo = _least_excess(model, u, j, (a_idx[pa], ga[pa]), (b_idx[pb], gb[pb]))
    ok &= e_lo <= s * ideal / (1 - s) * (1 + 1e-12)
    ok &= ideal + e_lo <= 1 / lim.f_lo * (1 + 1e-12)
    n = np.flatnonzero(ok)
    if len(n) == 0:
        return
    rows = np.full(len(n), u, dtype=np.int64)
    i1, i2 = _pair_codes(walk, pairs.index[sel[n]])
    i3, i4 = a_idx[pa[n]], b_idx[pb[n]]
    jj = np.full(len(n), j, dtype=np.int64)
    max_cost = model.spec.limits.max_cost
    if walk.coupled and max_cost is not None:  # the acceptance's cost cap, before scoring
        cost = row_cost(model, rows, np.stack([i1, i2, i3, i4], axis=1), jj)
        within = np.flatnonzero(cost <= max_cost + 1e-12)
        rows, i1, i2, i3, i4, jj, n = (x[within] for x in (rows, i1, i2, i3, i4, jj, n))
    least = part_scores(model, rows, i1, i2, i3, i4, jj)
    least += _least(model, lim, ideal[n], e_lo[n], big_h[n], shortest[n])
    walk.add((rows, i1, i2, i3, i4, jj, least, h[n], l_[n], big_h[n], delta[n], e_lo[n]))


def _least_excess(
    model: SearchModel, u: int, j: int, a: tuple[I64, F64], b: tuple[I64, F64]
) -> F64:
    """(B4) E_lo: a lower bound of E = T - T_i per row of stage ``u`` and C1 ``j`` with R3A
    and R3B (indices, ramp currents g_A, g_B) ``a`` and ``b``: every step time is at least
    the transport delay td (the edges' times and the integrator's lag are not negative,
    (L2)), i ≥ I/(1 + ε) with ε ≤ 1/(ωt·R·C1), and i_b + Ib1 ≤ g_B, so t_top - l ≥
    td·(i_a + i_b)/g_B and t_bottom - h ≥ td·(i_a + i_b)/g_A."""
    loop = model.stages[u].loop
    td, gbw = float(loop.delay), float(loop.integrator_gbw)
    ib1 = model.stages[u].integrator_bias_a
    c1 = float(model.capacitors.value[j])
    (ia_idx, g_a), (ib_idx, g_b) = a, b
    res = model.resistors.value
    if math.isinf(gbw):
        slow_a = slow_b = np.ones(len(g_a))
    else:
        wt = 2.0 * math.pi * gbw
        slow_a, slow_b = 1.0 + 1.0 / (wt * res[ia_idx] * c1), 1.0 + 1.0 / (wt * res[ib_idx] * c1)
    both = (g_a + ib1) / slow_a + (g_b - ib1) / slow_b
    return np.asarray(td * np.maximum(both, 0.0) * (1.0 / g_a + 1.0 / g_b))


def _pair_codes(walk: _Walk, p: I64) -> tuple[I64, I64]:
    return walk.pair_codes[0][p], walk.pair_codes[1][p]
