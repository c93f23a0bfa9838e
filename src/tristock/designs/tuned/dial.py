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
the sums of each term's end values. ``search.bounds`` proves the amplitude and each
overshoot fall with P and rise with the drives a = VH - V', b = VL + V'; the slopes b·k/P and
a·k/P do too; and the share D/(T_ideal + D), D = T - T_ideal, falls with P (D/P falls:
t_g/P falls since g(ρ)/ρ does) and is at most D(P1, weakest drives)/(T_ideal(P1, strongest)
+ D(P1, weakest)). An interval whose enclosure meets every rule passes; a point that fails
fails the range; otherwise the interval is halved (at most ``MAX_DEPTH`` times, so the
decision is exact to 2^-40 of the travel: a range whose extreme sits that close to a band
edge counts as inside).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.timing import timing_network
from tristock.designs.tuned.network import AtWiper, Board, at_wiper
from tristock.search.bounds import loop_timing
from tristock.spec.model import Spec

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
MAX_DEPTH = 40


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


def enclosure_ok(
    board: Board, lo: F64, hi: F64, control: str, limits: Limits, rating: F64
) -> NDArray[np.bool_]:
    """Whether every rule holds at every α in [lo, hi] by the enclosure (module docstring);
    False means undecided, not failed."""
    p_a, o_a, i_a = _terms(board, lo, control)
    p_b, o_b, i_b = _terms(board, hi, control)
    p1, p2 = np.minimum(p_a, p_b), np.maximum(p_a, p_b)
    v_lo = np.minimum(o_a, o_b) + np.minimum(i_a, i_b)
    v_hi = np.maximum(o_a, o_b) + np.maximum(i_a, i_b)
    k = board.r1 / board.r2
    span = board.vh + board.vl
    a_weak, b_weak = board.vh - v_hi, board.vl + v_lo
    a_strong, b_strong = board.vh - v_lo, board.vl + v_hi
    ok = (a_weak > 0) & (b_weak > 0)
    a_weak, b_weak = np.where(ok, a_weak, 1.0), np.where(ok, b_weak, 1.0)

    def timing(p: F64, a: F64, b: F64):
        return loop_timing(
            k, p, span, a, b, slew_rise=board.slew, slew_fall=board.slew, delay=board.delay,
            gbw=board.gbw,
        )  # fmt: skip

    big = timing(p1, a_strong, b_strong)
    small = timing(p2, a_weak, b_weak)
    weak1 = timing(p1, a_weak, b_weak)
    shift = (1 + k) * (board.vos2 + board.ib2 * board.r1 * board.r2 / (board.r1 + board.r2))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        a_hi = k * span + big.overshoot_v
        a_lo = k * span + small.overshoot_v
        top_hi = board.vl * k + shift + big.overshoot_top_v
        top_lo = board.vl * k + shift + small.overshoot_top_v
        bottom_lo = -board.vh * k + shift - big.overshoot_bottom_v
        bottom_hi = -board.vh * k + shift - small.overshoot_bottom_v
        ok &= (a_lo >= limits.a_min) & (a_hi <= limits.a_max)
        ok &= (top_hi < board.vh) & (bottom_lo > -board.vl)
        rc = p1 / k
        ok &= (b_strong <= board.slew * rc) & (a_strong <= board.slew * rc)
        d_weak = weak1.period_s - weak1.ideal_period_s
        ok &= d_weak / (big.ideal_period_s + d_weak) <= limits.share
        peak = np.maximum.reduce(
            [np.abs(top_hi), np.abs(top_lo), np.abs(bottom_lo), np.abs(bottom_hi)]
        )
        ok &= rating >= peak * (1 + limits.margin)
    return np.asarray(ok)


@dataclass
class DialResult:
    """Per board: whether the range passes at every wiper position, and the full model's
    nominal frequency (Hz) and amplitude (Vpp) at the bottom and the top of the range."""

    ok: NDArray[np.bool_]
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
    item = np.flatnonzero(ok)
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
        f_bottom=np.asarray(bottom.pred.frequency_hz, dtype=float) * np.ones(n),
        f_top=np.asarray(top.pred.frequency_hz, dtype=float) * np.ones(n),
        amp_bottom=np.asarray(bottom.pred.amplitude_vpp, dtype=float) * np.ones(n),
        amp_top=np.asarray(top.pred.amplitude_vpp, dtype=float) * np.ones(n),
    )
