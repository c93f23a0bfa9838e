"""Bounds of the full circuit model over what a search row can reach.

The search proves answers optimal under the full model (``physics.predict``), not
under a simplified one. For that it needs, for every (stage option, R1/R2 pair), a window of
P = k·R3·C1 outside which no row can meet the frequency band, and bounds of the amplitude and
the timing share over that window, valid for every R3 the catalog offers. They come from the
loop's timing written with the two integrator drives a and b as separate inputs
(``tristock.circuits.looptiming``, the function ``predict`` itself evaluates): over a range of the
integrator error voltage Ve = Vos1 + Ib1·R3 (R3 unknown before the row is chosen) and of
the square levels VH, VL (a topology's ``StageLoop`` gives them as intervals over the rows a
stage can be in: equal ends for the op-amp Schmitt loop, a range where the levels depend on
the row's resistors; or over the rows of one (stage, R1/R2 pair), ``SearchForm.pair_levels``)
each quantity is monotone in each input, so its extremes sit at the ends of the ranges. The
levels enter in two ways, taken as independent inputs: through the span
VH + VL in [VH_lo + VL_lo, VH_hi + VL_hi] and through the drives a = VH - Ve in
[VH_lo - Ve_hi, VH_hi - Ve_lo] and b = VL + Ve in [VL_lo + Ve_lo, VL_hi + Ve_hi]; a box that
holds every (span, a, b) of a row, so extremes over it bound the row.

Notation as in ``tristock.circuits.looptiming``: span = VH + VL, RC' = RC + 1/ωt (ε = 1/(ωt·RC)),
τi = RC/(ωt·RC + 1) the integrator's lag; each edge's centroid c = td + G(W; μ, D)/λ and
overshoot time o = td + G(L0; μ, D)/λ with λ = 2π·GBW·k/(1 + k), μ = slope/(k·SR) (slope =
drive/RC'), W = λ·span/SR the whole edge and L0 = λ·drive/SR the part up to the integrator's
neutral level, G the comparator edge's mean passage time (``transition.scaled_mean_time``;
for GBW = inf a linear slew: c = td + span/(2·SR), o = td + drive/(2·SR)).

Three properties of G carry everything, exact for the linear slew and verified for the
tabulated edge (tests/search/test_search_bounds.py, on a grid three times finer than the table in
every axis and past its ends) wherever the scaled level is at least ``EDGE_LEVEL_MIN``:
(G1) G does not rise with μ (a steeper triangle builds the edge up sooner);
(G2) μ·G does not fall with μ (the slope times the overshoot time grows with the slope);
(G3) G does not fall with L (a longer edge takes longer on average).
Below that level (an edge shorter than a tenth of the build-up time 1/λ: a very fast slew
against the gain-bandwidth) the interpolated table is not monotone, so no bound is claimed
there: the functions below answer (0, inf) for such op amps and pairs, and the search then
evaluates every row of the pair (``claimed``).
From them:
- (M1) T = span·(span·k·RC'/(a·b) + d_r/a + d_f/b), d = c + τi, rises with P: RC' and τi
  rise, μ falls so c rises (G1).
- (M2) T falls with a and with b, each alone: the first term directly; d_f depends on a only
  through μ_f ∝ a (G1), d_r on b likewise; 1/a and 1/b fall.
- (M5) T rises with the span at fixed drives: the first term directly; the span enters d
  only through the whole edge W ∝ span (G3; linear slew: c = td + span/(2·SR)). So does
  D = T - T_i (same terms with RC' - RC), and so does T_i = span²·k·RC/(a·b).
- The overshoots do not depend on the span: o = td + G(L0)/λ with L0 = λ·drive/SR, the
  lag τi and RC' neither; the thresholds' distance is k·span. So the amplitude's upper end
  takes span_hi, its lower end span_lo.
- (M3, M4) for rows whose timing share is at most s ≤ 0.4 (the others are rejected anyway):
  T ≥ T_i·(1 + ε), so the share is at least ε/(1 + ε) and ε ≤ s/(1 - s) < 1, i.e.
  P ≥ ``share_p_floor``; there each overshoot lies between drive·o/RC' and
  drive·(o + τi)/RC' (the lag area is between 0 and drive·τi); both ends fall with P
  (τi/RC' = ε/(1 + ε)² falls for ε < 1; drive·G/(λ·RC') is k·SR·μ·G/λ with μ ∝ 1/RC',
  which falls with P by G2; td·drive/RC' falls) and rise with
  their drive (G2 for μ ∝ drive and G3 for L0 ∝ drive).
- (M6) a delay interval (``StageLoop.delay_spread`` > 0: the edges' transport delay td is
  only known to lie in [delay, delay + delay_spread] over the stage's rows, as for the
  zener-clamped square): for GBW = inf, c = td + span/(2·SR) and o = td + drive/(2·SR) carry
  td additively, so T, D = T - T_i and both ends of each overshoot rise with td while T_i
  does not depend on it. The upper ends (period, overshoot reach) take the longest delay,
  the lower ends (period, overshoot floor, D in the share's floor) the shortest. With a finite
  GBW, td also enters G through λ·td, where no monotonicity is verified: ``claimed``
  answers False for a finite GBW with a spread.
Every row the search evaluates is also held to these bounds at run time
(``search.rows``), and a violation withdraws the proof.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.looptiming import LoopTiming, loop_period, loop_timing
from tristock.circuits.searchform import StageLoop
from tristock.circuits.transition import EDGE_LEVEL_MIN

Array = NDArray[np.float64]


class Bounds(NamedTuple):
    """Lower and upper values of one quantity at each point."""

    lo: Array
    hi: Array


def _edges(loop: StageLoop, delay: Array | None) -> dict[str, Array]:
    """The loop's edge and op-amp arguments of ``loop_timing``, with the edges' transport
    delay ``delay`` (the loop's shortest, ``loop.delay``, when not given)."""
    return {
        "slew_rise": loop.slew_rise,
        "slew_fall": loop.slew_fall,
        "delay": loop.delay if delay is None else delay,
        "gbw": loop.gbw,
        "integrator_gbw": loop.integrator_gbw,
    }


def _timing(
    loop: StageLoop, k: Array, p: Array, span: Array, a: Array, b: Array, delay: Array | None = None
) -> LoopTiming:
    """The loop's timing at P = k·RC with the span VH + VL and the drives a and b, the edges'
    transport delay ``delay`` (``_edges``)."""
    return loop_timing(k, p / k, span, a, b, **_edges(loop, delay))


def _period(
    loop: StageLoop, k: Array, p: Array, span: Array, a: Array, b: Array, delay: Array | None = None
) -> Array:
    """``_timing(...).period_s`` alone, the same to the bit (``looptiming.loop_period``)."""
    return loop_period(k, p / k, span, a, b, **_edges(loop, delay))


def _at_both_delays(
    loop: StageLoop, k: Array, p: Array, drives: tuple[Array, Array, Array]
) -> tuple[LoopTiming, LoopTiming]:
    """The timing at the shortest and at the longest delay of the loop's interval (the same
    evaluation twice where no stage has a delay spread): every quantity ``loop_timing``
    gives rises with the delay (d = c + τi and o rise with td), so the lower ends take the
    first and the upper ends the second."""
    short = _timing(loop, k, p, *drives)
    if not np.any(np.asarray(loop.delay_spread) > 0):
        return short, short
    return short, _timing(loop, k, p, *drives, delay=loop.delay_hi)


def _weak(loop: StageLoop) -> tuple[Array, Array, Array]:
    """The longest period's inputs: the largest span and the smallest drives (M2, M5)."""
    return (loop.span_hi, *loop.weak())


def _strong(loop: StageLoop) -> tuple[Array, Array, Array]:
    """The shortest period's inputs: the smallest span and the largest drives."""
    return (loop.span_lo, *loop.strong())


def claimed(loop: StageLoop, k: Array) -> NDArray[np.bool_]:
    """Where the bounds hold: an ideal comparator (GBW = inf, a linear slew), or every edge's
    levels λ·V/SR at least EDGE_LEVEL_MIN for the smallest drive of the Ve range and the
    faster slew (the whole edge, λ·span/SR, is longer still) and no delay spread (M6)."""
    a, b = loop.weak()
    lam = 2.0 * np.pi * np.asarray(loop.gbw, dtype=float) * k / (1.0 + k)
    fastest = np.maximum(loop.slew_rise, loop.slew_fall)
    with np.errstate(invalid="ignore", over="ignore"):
        level = lam * np.minimum(a, b) / fastest
    spread = np.asarray(loop.delay_spread) > 0
    return np.asarray(np.isinf(loop.gbw) | ((level >= EDGE_LEVEL_MIN) & ~spread))


def _or_unbounded(ok: NDArray[np.bool_], bounds: Bounds) -> Bounds:
    return Bounds(np.where(ok, bounds.lo, 0.0), np.where(ok, bounds.hi, np.inf))


def period_bounds(loop: StageLoop, k: Array, p: Array) -> Bounds:
    """Bounds of the period at (k, P) over the Ve range (s): by (M2) the weakest drives give
    the longest period and the strongest the shortest; (0, inf) where no bound is claimed."""
    t = Bounds(
        _period(loop, k, p, *_strong(loop)),
        _period(loop, k, p, *_weak(loop), delay=loop.delay_hi),
    )
    return _or_unbounded(claimed(loop, k), t)


def amplitude_bounds(loop: StageLoop, k: Array, p_lo: Array, p_hi: Array) -> Bounds:
    """Bounds of the triangle's peak-to-peak over P in [p_lo, p_hi] and the Ve range (V):
    k·span plus the overshoots, the largest with the strongest drives at the smallest P
    (upper ends, lag areas left out), the smallest with the weakest at the largest P (lower
    ends, whole lags taken off); (M3, M4), claimed where ε ≤ 1 at p_lo (P ≥ k/ωt), else
    (0, inf)."""
    return range_bounds(loop, k, p_lo, p_hi)[0]


def range_bounds(loop: StageLoop, k: Array, p_lo: Array, p_hi: Array) -> tuple[Bounds, Array]:
    """``amplitude_bounds`` and ``timing_share_floor`` over [p_lo, p_hi] at once: both take
    the strongest drives' timing at p_lo and the weakest's at p_hi, computed here once."""
    strong, strong_late = _at_both_delays(loop, k, p_lo, _strong(loop))
    weak = _timing(loop, k, p_hi, *_weak(loop))
    ok = claimed(loop, k)
    wt = 2.0 * np.pi * np.asarray(loop.integrator_gbw, dtype=float)
    a = Bounds(
        k * loop.span_lo + overshoot_floors(loop, weak),
        k * loop.span_hi + strong_late.reach_top_v + strong_late.reach_bottom_v,
    )
    d_min = strong.period_s - strong.ideal_period_s
    share = np.where(ok, d_min / (weak.ideal_period_s + d_min), 0.0)
    return _or_unbounded(ok & (np.asarray(p_lo) * wt >= k), a), np.asarray(share)


def point_bounds(loop: StageLoop, k: Array, p: Array) -> tuple[Bounds, Bounds]:
    """``period_bounds(loop, k, p)`` and ``amplitude_bounds(loop, k, p, p)`` at once: both
    take the strongest and the weakest drives' timing at P, computed here once."""
    strong, strong_late = _at_both_delays(loop, k, p, _strong(loop))
    weak, weak_late = _at_both_delays(loop, k, p, _weak(loop))
    ok = claimed(loop, k)
    wt = 2.0 * np.pi * np.asarray(loop.integrator_gbw, dtype=float)
    period = _or_unbounded(ok, Bounds(strong.period_s, weak_late.period_s))
    amplitude = Bounds(
        k * loop.span_lo + overshoot_floors(loop, weak),
        k * loop.span_hi + strong_late.reach_top_v + strong_late.reach_bottom_v,
    )
    return period, _or_unbounded(ok & (np.asarray(p) * wt >= k), amplitude)


def overshoot_floors(loop: StageLoop, weak: LoopTiming) -> Array:
    """The lower end of the two overshoots together (V), from the weakest drives' timing
    ``weak`` at the largest P: its own floors (lags taken off) where
    ``loop.overshoot_time_min`` is NaN, else (a_lo + b_lo)·o_min/RC'.

    The second holds for a loop whose rows' overshoots are at least drive·o/RC'_row with
    o ≥ o_min ≥ 0 and drive ≥ the loop's weakest (the lag's part drive·τi less its area is
    ≥ 0, as for the floors above): RC' = P/k + 1/ωt at the largest P is at least every
    row's RC'. A floor that needs no property of the edge's shape (a comparator's unequal
    edges, an open drain's level-dependent share of an edge; ``comparator_schmitt.stages``).
    """
    a, b = loop.weak()
    o_min = np.asarray(loop.overshoot_time_min, dtype=float)
    with np.errstate(invalid="ignore"):
        taken = (a + b) * o_min / weak.rc_eff_s
    return np.asarray(
        np.where(np.isnan(o_min), weak.floor_top_v + weak.floor_bottom_v, taken), dtype=float
    )


def timing_share_floor(loop: StageLoop, k: Array, p_lo: Array, p_hi: Array) -> Array:
    """A lower bound of 1 - T_i/T over P in [p_lo, p_hi] and the Ve range.

    s = D/(T_i + D) with D = T - T_i = span·(span·k·(RC' - RC)/(a·b) + d_r/a + d_f/b): s rises
    with D and falls with T_i. D is smallest at the smallest P and the strongest drives
    (RC' - RC = 1/ωt is fixed; (M1), (M2)), T_i largest at the largest P and the weakest."""
    return range_bounds(loop, k, p_lo, p_hi)[1]


def share_p_floor(loop: StageLoop, k: Array, max_share: float) -> Array:
    """The smallest P a row with timing share at most s can have: T ≥ T_i·(1 + ε) gives
    s ≥ ε/(1 + ε), so ε = 1/(ωt·RC) ≤ s/(1 - s), i.e. P = k·RC ≥ k·(1 - s)/(s·ωt) (0 for an
    ideal integrator). Above it ε < 1, where τi/RC' = ε/(1 + ε)² falls as P grows (M3)."""
    wt = 2.0 * np.pi * np.asarray(loop.integrator_gbw, dtype=float)
    return np.asarray(k * (1.0 - max_share) / (max_share * wt), dtype=float)


def window(loop: StageLoop, k: Array, t_min: Array, t_max: Array) -> Bounds:
    """The range of P outside which the period cannot lie in [t_min, t_max], for any R3.

    By (M1) both period bounds rise with P, so the answer is [P_a, P_b] with
    T_hi(P_a) = t_min and T_lo(P_b) = t_max (``lowest_p``, ``highest_p``), both ends found
    in one root search (each element's arithmetic is that of its own end alone).
    """
    k, t_min, t_max = np.broadcast_arrays(np.asarray(k, dtype=float), t_min, t_max)
    n = len(k)
    both = StageLoop(*(np.tile(np.broadcast_to(x, (n,)), 2) for x in loop))
    drives = tuple(
        np.concatenate([np.broadcast_to(w, (n,)), np.broadcast_to(s, (n,))])
        for w, s in zip(_weak(loop), _strong(loop), strict=True)
    )
    side = np.repeat([-1.0, 1.0], n)
    p = _edge(both, np.tile(k, 2), np.concatenate([t_min, t_max]), drives, side)
    return Bounds(p[:n], p[n:])


def p_ceiling(loop: StageLoop, k: Array, t_max: Array | float) -> Array:
    """A P above which no row's period is at most ``t_max``, found without a root search (an
    upper end for ``window``'s, cheap enough to screen many ratios first).

    The ideal part of the period, T_i = span²·P/(a·b), is smallest with the strongest drives
    and the smallest span, where it reaches t_max at P_i = t_max·a·b/span²; the edges' delays
    lengthen the period, so normally T_lo(P_i·(1 + 1e-6)) > t_max as computed, and then
    by (M1) every larger P is out. Where that does not hold (or no bound is claimed): inf."""
    span, a, b = _strong(loop)
    p = np.asarray(t_max * a * b / (span * span) * (1.0 + 1e-6), dtype=float)
    p = np.broadcast_to(p, np.shape(k))
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        period = _period(loop, k, p, span, a, b)
        verified = claimed(loop, k) & (period > t_max)
    return np.asarray(np.where(verified, p, np.inf), dtype=float)


def p_floor(loop: StageLoop, t_min: Array | float, max_share: float) -> Array:
    """A P below which no row with its period at least ``t_min`` and its timing share at
    most s exists (a lower end for ``window``'s, without a root search).

    The share is 1 - T_i/T, so T_i ≥ (1 - s)·T ≥ (1 - s)·t_min; and T_i = span²·P/(a·b) is
    largest with the weakest drives and the largest span, so P ≥ (1 - s)·t_min·a·b/span²
    there (narrowed by 1e-6 for rounding). No property of the comparator edge is used."""
    a, b = loop.weak()
    span = loop.span_hi
    return np.asarray((1.0 - max_share) * t_min * a * b / (span * span) * (1.0 - 1e-6))


def lowest_p(loop: StageLoop, k: Array, t_min: Array) -> Array:
    """P_a with T_hi(P) < t_min for every P < P_a (0 when the delays alone reach t_min, or no
    bound is claimed).

    Newton's method finds the root of the weakest drives' period; the end is then pushed down
    until T_hi(P_a) < t_min holds as computed, so every row left out is outside the band (a
    row on the edge stays in)."""
    weak = _weak(loop)
    return _edge(loop, k, np.asarray(t_min, dtype=float), weak, -1.0)


def highest_p(loop: StageLoop, k: Array, t_max: Array) -> Array:
    """P_b with T_lo(P) > t_max for every P > P_b (inf when no root is found, or no bound is
    claimed): the strongest drives' period, as ``lowest_p``."""
    strong = _strong(loop)
    return _edge(loop, k, np.asarray(t_max, dtype=float), strong, 1.0)


def _edge(
    loop: StageLoop, k: Array, target: Array, drives: tuple[Array, ...], side: Array | float
) -> Array:
    """Where the period at ``drives`` crosses ``target``, pushed outwards (side -1: down, the
    window's low end, at the loop's longest delay; +1: up, its high end, at its shortest; one
    side per element or one for all) until it is strictly past, as computed."""
    k, target = np.broadcast_arrays(np.asarray(k, dtype=float), target)
    n = len(k)
    span, a, b = (np.broadcast_to(x, (n,)) for x in drives)
    down = np.broadcast_to(np.asarray(side) < 0, (n,))
    ok = np.broadcast_to(claimed(loop, k), (n,))

    # what the period reads of the loop, one array of n each (indexed by each call's rows)
    sr, sf, gbw, igbw, short, long = (
        np.broadcast_to(x, (n,))
        for x in (
            loop.slew_rise, loop.slew_fall, loop.gbw, loop.integrator_gbw, loop.delay,
            loop.delay_hi,
        )
    )  # fmt: skip

    def period(p: Array, sel: NDArray[np.int64]) -> Array:
        ks = k[sel]
        return loop_period(
            ks,
            p / ks,
            span[sel],
            a[sel],
            b[sel],
            slew_rise=sr[sel],
            slew_fall=sf[sel],
            delay=np.where(down[sel], long[sel], short[sel]),
            gbw=gbw[sel],
            integrator_gbw=igbw[sel],
        )

    p = np.maximum(target * a * b / (span * span), 1e-30)  # the ideal switch's P (too large)
    todo = np.flatnonzero(ok)
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        for _ in range(40):  # Newton steps in ln P
            if len(todo) == 0:
                break
            m = len(todo)
            # T and T at P·(1 + 1e-6) in one call (elementwise: the same values as two)
            both = period(np.concatenate([p[todo], p[todo] * (1 + 1e-6)]), np.tile(todo, 2))
            t = both[:m]
            slope = (both[m:] - t) / 1e-6  # dT/d ln P
            step = np.where(slope > 0, (target[todo] - t) / np.where(slope > 0, slope, 1.0), 0.0)
            step = np.clip(np.where(np.isfinite(step), step, 0.0), -2.0, 2.0)
            p[todo] = p[todo] * np.exp(step)
            todo = todo[np.abs(step) >= 1e-12]
        push = 1e-12
        todo = np.flatnonzero(ok)
        for _ in range(60):
            t = period(p[todo], todo)
            bad = np.where(down[todo], ~(t < target[todo]), ~(t > target[todo]))
            todo = todo[bad]
            if len(todo) == 0:
                break
            p[todo] = p[todo] * np.where(down[todo], 1 - push, 1 + push)
            push = min(2 * push, 0.5)
    # Where no push settles it (or nothing is claimed), keep every P on that side: a wider
    # window only costs rows.
    far = np.where(down, 0.0, np.inf)
    unsettled = np.zeros(n, dtype=bool)
    unsettled[todo] = True
    return np.asarray(np.where(ok & ~unsettled, p, far), dtype=float)


def overshoot_fraction_cap(max_timing_share: float, t_max_over_t_min: float) -> float:
    """An upper bound of ε = (A - k·span)/(k·span) for every row whose timing share is at
    most s and whose period lies in a band with T_max/T_min = r: ε ≤ s·r/(1 - s).

    Each overshoot is at most drive·(o + τi)/RC' ≤ drive·d/RC' ≤ drive·d·k/P, since o ≤ c
    (G3: the drive is at most the span, so L0 ≤ W) and RC' ≥ RC. So
    A - k·span ≤ (k/P)·(b·d_r + a·d_f) = (k/P)·a·b·(d_r/a + d_f/b) ≤ (k/P)·a·b·D/span with
    D = T - T_i ≤ s·T_max; and T_i = span²·P/(a·b) ≥ (1 - s)·T_min. Dividing gives the bound,
    whatever a, b and P.
    """
    s = max_timing_share
    return s * t_max_over_t_min / (1.0 - s)
