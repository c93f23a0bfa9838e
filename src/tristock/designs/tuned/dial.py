"""The nominal checks of one range over the whole dial, decided exactly.

A range is used at every wiper position α in [0, 1], so the rules the fixed search applies at
its one operating point (``search.rows``) hold here at every α, at nominal values, 25 °C and
nominal rails (``network.nominal_board``):

- the loop oscillates (V' strictly between -VL and VH);
- the triangle amplitude lies in the spec's band;
- its peaks stay inside the integrator's swing (peak_high < VH, peak_low > -VL);
- the integrator slews at least as fast as each ramp (b ≤ SR·RC and a ≤ SR·RC, RC = P/k);
- the share of the period set by op-amp timing, 1 - T_ideal/T, is at most
  ``limits.max_timing_share``;
- the capacitor's rating covers the largest |peak| with the amplitude margin.

The full model is exact at a point; between points the check uses an enclosure. Over an
interval [α1, α2] of the dial, P = k·R_eff·C/β is monotone in α (series: P ∝ R3 + α·RV;
divider: f ∝ β/R_eff rises with α, since d ln(β/R_eff)/dα has the sign of
(R4 + RV)·R3 + (R4 + α·RV)² > 0), and V' = Vos1/β + Ib1·(R_eff/β) is a sum of two terms each
monotone in α (1/β and R_eff/β are). So P lies between its values at the ends and V' between
the sums of each term's end values, i.e. the drives a = VH - V', b = VL + V' between their
weakest and strongest. In the full model (``tristock.looptiming``; k fixed, the board's):

- each overshoot is drive·o/RC' + L with L = drive·τi/RC' - A/RC' the lag's part (A the lag
  area, ``integrator.lag_overshoot_area``, 0 ≤ A ≤ drive·τi so 0 ≤ L ≤ drive·τi/RC').
  drive·o/RC' (``LoopTiming.floor_*``) = k·SR·μ·o with μ = drive/(SR·Q) does not rise with
  P (G2) and does not fall with the drive (G2 through μ, G3 through the level
  λ·drive/SR): it lies between its values at (largest P, weakest drives) and (smallest P,
  strongest). In L, τi/RC' = ε/(1 + ε)² (ε = k/(ωt·P)) is taken between its least and
  largest value over the interval (in closed form: it peaks at ε = 1), and A/RC' = A·k/Q
  between A(weakest drives, τi at the smallest P)·k/Q(largest P) and A(strongest drives,
  τi at the largest P)·k/Q(smallest P): A does not fall with τi nor with either drive (A1,
  below) and τi rises with P. Every one of these bounds tends to the value at a point as
  the interval shrinks, so halving decides every interval whose rules hold strictly;
- the slopes drive/RC (the slew rule's, with RC = P/k) are largest at the smallest P and
  strongest drives;
- the timing share H/T (H = T - T_ideal) does not rise with P (``loopbounds`` H2) and H does
  not fall as a drive weakens while T_ideal = span²·P/(a·b) does not rise as it strengthens,
  so the share is at most H(P1, weakest)/(T_ideal(P1, strongest) + H(P1, weakest)).

(A1): the lag area A(before, after, SR, τi) of ``integrator.lag_overshoot_area`` does not
fall with τi, with the drive before the edge nor with the one after it: with u = before/(SR·τi),
v = after/(SR·τi), A = SR·τi²·(1 + W0(-e^(-1-u)))²/2 while the lagged crossing precedes the
end of the slew (rising in u, W0 rising on [-1/e, 0); v absent) and
SR·τi²·(v²/2 + v·ln((1 - e^(-u-v))/v)) after it (rising in u); the step's
after·τi·ln(1 + before/after) rises in both drives and τi. Checked on dense grids of u, v
and τi (tests/test_tuning_bounds.py), the rest of (A1) with them; its closed form rounds
(a relative 1e-8 at most there), so the areas enter with ``AREA_ROUNDING`` of slack.

These rest on G1-G3 at the edge's levels, claimed where λ·drive/SR ≥ EDGE_LEVEL_MIN at the
weakest drive the dial reaches (``claimed``). An interval whose enclosure meets every rule
passes; a point that fails fails the range; otherwise the interval is halved (at most
``MAX_DEPTH`` times, so the decision is exact to 2^-40 of the travel: a range whose extreme
sits that close to a band edge counts as inside). A board whose edge is not claimed is
decided at ``GRID_POINTS`` evenly spaced wiper positions instead and reported uncertified
(``DialResult.certified``): a failure there is exact, a pass is not proven between the points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.integrator import integrator_terms, lag_overshoot_area
from tristock.circuits.looptiming import LoopTiming, loop_timing
from tristock.circuits.timing import timing_network
from tristock.circuits.transition import EDGE_LEVEL_MIN
from tristock.designs.tuned.edges import edge_rate, integrator_rate
from tristock.designs.tuned.network import AtWiper, Board, at_wiper
from tristock.spec.model import Spec

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
MAX_DEPTH = 40
#: Relative rounding allowed in the lag area's closed form where (A1) is used (observed
#: below 1e-8 on the grids of tests/test_tuning_bounds.py).
AREA_ROUNDING = 1e-6
#: Wiper positions at which a board whose edge is not claimed is decided (uncertified).
GRID_POINTS = 65


@dataclass
class Limits:
    """The spec's nominal rules as numbers: amplitude band (Vpp), timing share, margin."""

    a_min: float
    a_max: float
    share: float
    margin: float

    @classmethod
    def of(cls, spec: Spec) -> Limits:
        a, t = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
        (aa, ab) = spec.amplitude_band_ln
        return cls(a * np.exp(aa), a * np.exp(ab), spec.limits.max_timing_share, t)


def point_ok(board: Board, at: AtWiper, limits: Limits, rating: F64) -> NDArray[np.bool_]:
    """The rules at one wiper position, exactly (full model)."""
    p = at.pred
    a = board.vh - at.v_drive
    b = board.vl + at.v_drive
    span = board.vh + board.vl
    rc = at.p * board.r2 / board.r1
    with np.errstate(invalid="ignore", divide="ignore"):
        amp = np.asarray(p.amplitude_vpp)
        ok = at.valid & (amp >= limits.a_min) & (amp <= limits.a_max)
        ok &= (np.asarray(p.peak_high_v) < board.vh) & (np.asarray(p.peak_low_v) > -board.vl)
        ok &= (b <= board.slew * rc) & (a <= board.slew * rc)
        share = 1.0 - span * span * at.p / (a * b) / np.asarray(p.period_s)
        ok &= share <= limits.share
        peak = np.fmax(np.abs(np.asarray(p.peak_high_v)), np.abs(np.asarray(p.peak_low_v)))
        ok &= rating >= peak * (1 + limits.margin)
    return np.asarray(ok)


def _terms(board: Board, alpha: F64, control: str) -> tuple[F64, F64, F64]:
    """P, Vos1/β and Ib1·R_eff/β at ``alpha`` (one per board)."""
    r_eff, beta = timing_network(board.r3, board.rv, alpha, control, board.r4)
    r_eff = np.asarray(r_eff, dtype=float) * np.ones_like(board.r3)
    beta = np.asarray(beta, dtype=float) * np.ones_like(board.r3)
    k = board.r1 / board.r2
    return k * r_eff * board.c / beta, board.vos1 / beta, board.ib1 * r_eff / beta


def _drive_range(board: Board, lo: F64, hi: F64, control: str) -> tuple[F64, F64, F64, F64]:
    """P at each end of [lo, hi] (smaller first) and V' between its bounds (module
    docstring): (p1, p2, v_lo, v_hi)."""
    p_a, o_a, i_a = _terms(board, lo, control)
    p_b, o_b, i_b = _terms(board, hi, control)
    v_lo = np.minimum(o_a, o_b) + np.minimum(i_a, i_b)
    v_hi = np.maximum(o_a, o_b) + np.maximum(i_a, i_b)
    return np.minimum(p_a, p_b), np.maximum(p_a, p_b), v_lo, v_hi


def claimed(board: Board, control: str) -> NDArray[np.bool_]:
    """Whether the enclosure may be used for the board over its whole dial: an ideal
    comparator, or the edge's level λ·drive/SR at least EDGE_LEVEL_MIN at the weakest drive
    any wiper position gives (λ = 2π·GBW·k/(1 + k))."""
    n = len(board.r1)
    *_, v_lo, v_hi = _drive_range(board, np.zeros(n), np.ones(n), control)
    weakest = np.minimum(board.vh - v_hi, board.vl + v_lo)
    with np.errstate(invalid="ignore", over="ignore"):
        level = edge_rate(board.r1 / board.r2, board.gbw) * weakest / board.slew
    return np.asarray(np.isinf(board.gbw) | (level >= EDGE_LEVEL_MIN))


def enclosure_ok(
    board: Board, lo: F64, hi: F64, control: str, limits: Limits, rating: F64
) -> NDArray[np.bool_]:
    """Whether every rule holds at every α in [lo, hi] by the enclosure (module docstring;
    boards whose edge is ``claimed``); False means undecided, not failed."""
    p1, p2, v_lo, v_hi = _drive_range(board, lo, hi, control)
    k = board.r1 / board.r2
    span = board.vh + board.vl
    a_weak, b_weak = board.vh - v_hi, board.vl + v_lo
    a_strong, b_strong = board.vh - v_lo, board.vl + v_hi
    ok = (a_weak > 0) & (b_weak > 0)
    a_weak, b_weak = np.where(ok, a_weak, 1.0), np.where(ok, b_weak, 1.0)

    def timing(p: F64, a: F64, b: F64) -> LoopTiming:
        return loop_timing(
            k, p / k, span, a, b, slew_rise=board.slew, slew_fall=board.slew,
            delay=board.delay, gbw=board.gbw, integrator_gbw=board.gbw,
        )  # fmt: skip

    big = timing(p1, a_strong, b_strong)
    small = timing(p2, a_weak, b_weak)
    weak1 = timing(p1, a_weak, b_weak)
    shift = (1 + k) * (board.vos2 + board.ib2 * board.r1 * board.r2 / (board.r1 + board.r2))
    lag = _LagRange.of(board, k, p1, p2)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        lag_top = lag.part(b_weak, b_strong, a_weak, a_strong, board.slew)
        lag_bottom = lag.part(a_weak, a_strong, b_weak, b_strong, board.slew)
        top_big = big.floor_top_v + lag_top[1]
        top_small = small.floor_top_v + lag_top[0]
        bottom_big = big.floor_bottom_v + lag_bottom[1]
        bottom_small = small.floor_bottom_v + lag_bottom[0]
        a_hi = k * span + top_big + bottom_big
        a_lo = k * span + top_small + bottom_small
        top_hi = board.vl * k + shift + top_big
        top_lo = board.vl * k + shift + top_small
        bottom_lo = -board.vh * k + shift - bottom_big
        bottom_hi = -board.vh * k + shift - bottom_small
        ok &= (a_lo >= limits.a_min) & (a_hi <= limits.a_max)
        ok &= (top_hi < board.vh) & (bottom_lo > -board.vl)
        rc = p1 / k
        ok &= (b_strong <= board.slew * rc) & (a_strong <= board.slew * rc)
        h_weak = weak1.period_s - weak1.ideal_period_s
        ok &= h_weak / (big.ideal_period_s + h_weak) <= limits.share
        peak = np.maximum.reduce(
            [np.abs(top_hi), np.abs(top_lo), np.abs(bottom_lo), np.abs(bottom_hi)]
        )
        ok &= rating >= peak * (1 + limits.margin)
    return np.asarray(ok)


@dataclass
class _LagRange:
    """The lag's part of the overshoots over [p1, p2] (module docstring): τi/RC' between
    ``f_lo`` and ``f_hi``, τi between ``tau1`` and ``tau2``, k/Q between ``g2`` and ``g1``."""

    f_lo: F64
    f_hi: F64
    tau1: F64
    tau2: F64
    g1: F64
    g2: F64

    @classmethod
    def of(cls, board: Board, k: F64, p1: F64, p2: F64) -> _LagRange:
        wt = integrator_rate(board.gbw)
        with np.errstate(divide="ignore", invalid="ignore"):
            e1, e2 = k / (wt * p1), k / (wt * p2)  # ε at p1 is the larger
            f1, f2 = e1 / (1 + e1) ** 2, e2 / (1 + e2) ** 2
            peak = np.clip(1.0, e2, e1)
            f_hi = np.where(np.isfinite(wt), peak / (1 + peak) ** 2, 0.0)
            f_lo = np.where(np.isfinite(wt), np.minimum(f1, f2), 0.0)
        tau1 = integrator_terms(p1 / k, board.gbw).lag_s
        tau2 = integrator_terms(p2 / k, board.gbw).lag_s
        return cls(f_lo, f_hi, tau1, tau2, k / (p1 + k / wt), k / (p2 + k / wt))

    def part(
        self, drive_w: F64, drive_s: F64, other_w: F64, other_s: F64, slew: F64
    ) -> tuple[F64, F64]:
        """(lower, upper) bound of drive·τi/RC' - A/RC' for the edge with this drive."""
        area_lo = lag_overshoot_area(drive_w, other_w, slew, self.tau1) * (1 - AREA_ROUNDING)
        area_hi = lag_overshoot_area(drive_s, other_s, slew, self.tau2) * (1 + AREA_ROUNDING)
        hi = drive_s * self.f_hi
        lo = np.maximum(drive_w * self.f_lo - area_hi * self.g1, 0.0)
        return lo, np.minimum(hi - area_lo * self.g2, hi)


@dataclass
class DialResult:
    """Per board: whether the range passes at every wiper position, whether that was
    decided everywhere (``certified``; else at ``GRID_POINTS`` positions), and the full
    model's nominal frequency (Hz) and amplitude (Vpp) at the bottom and the top."""

    ok: NDArray[np.bool_]
    certified: NDArray[np.bool_]
    f_bottom: F64
    f_top: F64
    amp_bottom: F64
    amp_top: F64


def check_dial(
    board: Board, control: str, ends: tuple[float, float], limits: Limits, rating: F64
) -> DialResult:
    """Decide the nominal rules over the whole dial for every board (module docstring)."""
    n = len(board.r1)
    bottom = at_wiper(board, ends[0], control)
    top = at_wiper(board, ends[1], control)
    ok = point_ok(board, bottom, limits, rating) & point_ok(board, top, limits, rating)
    certified = claimed(board, control)
    grid = np.flatnonzero(ok & ~certified)
    if len(grid):
        b = board.take(grid)
        for alpha in np.linspace(0.0, 1.0, GRID_POINTS)[1:-1]:
            ok[grid] &= point_ok(b, at_wiper(b, float(alpha), control), limits, rating[grid])
    item = np.flatnonzero(ok & certified)
    lo = np.zeros(len(item))
    hi = np.ones(len(item))
    for _ in range(MAX_DEPTH):
        if len(item) == 0:
            break
        b = board.take(item)
        done = enclosure_ok(b, lo, hi, control, limits, rating[item])
        item, lo, hi = item[~done], lo[~done], hi[~done]
        if len(item) == 0:
            break
        mid = (lo + hi) / 2
        b = board.take(item)
        fine = point_ok(b, at_wiper(b, mid, control), limits, rating[item])
        ok[item[~fine]] = False
        keep = fine & ok[item]
        item, lo, hi, mid = item[keep], lo[keep], hi[keep], mid[keep]
        item = np.concatenate([item, item])
        lo, hi = np.concatenate([lo, mid]), np.concatenate([mid, hi])
        alive = ok[item]
        item, lo, hi = item[alive], lo[alive], hi[alive]
    return DialResult(
        ok=ok,
        certified=certified,
        f_bottom=np.asarray(bottom.pred.frequency_hz, dtype=float) * np.ones(n),
        f_top=np.asarray(top.pred.frequency_hz, dtype=float) * np.ones(n),
        amp_bottom=np.asarray(bottom.pred.amplitude_vpp, dtype=float) * np.ones(n),
        amp_top=np.asarray(top.pred.amplitude_vpp, dtype=float) * np.ones(n),
    )
