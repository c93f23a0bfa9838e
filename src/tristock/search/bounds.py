"""Bounds of the full circuit model over what a search row can reach.

The search proves answers optimal under the full model (``tristock.circuit.predict``), not
under a simplified one. For that it needs, for every (op amp, R1/R2 pair), a window of
P = k·R3·C1 outside which no row can meet the frequency band, and bounds of the amplitude and
the timing share over that window, valid for every R3 the catalog offers. They come from the
loop's period and overshoot written with the two integrator drives a and b as separate
inputs (``loop_timing``): at a = VH - Ve, b = VL + Ve it is exactly ``predict``, and over a
range of the integrator error voltage Ve = Vos1 + Ib1·R3 (R3 unknown before the row is
chosen) each quantity is monotone in each input, so its extremes sit at the ends.

Notation (volts from the reference, seconds, hertz): k = R1/R2, P = k·R3·C1, span = VH + VL,
β = k/(1 + k), ρ = SR·P/V (V the drive of the ramp before the transition),
g(ρ) = ln(1 + ρ)·(1 + 1/ρ) - 1, the comparator's GBW delay t_g = g(ρ)/(2π·GBW·β),
d_r = td + t_g,r + span/(2·SR_r) and d_f = td + t_g,f + span/(2·SR_f) (rise: the top turn,
driven by b; fall: the bottom turn, driven by a):

- period T = span·(span·P/(a·b) + d_r/a + d_f/b); ideal part T_i = span²·P/(a·b)
- overshoots: top (b·k/P)·(td + t_g,r + b/(2·SR_r)), bottom (a·k/P)·(td + t_g,f + a/(2·SR_f))
- amplitude A = k·span + both overshoots; timing share s = 1 - T_i/T

Monotonicity (each proven in its function's docstring, each checked by tests on random points):

- (M1) T increases with P; (M2) T decreases with a and with b, each alone;
- (M3) A decreases with P; (M4) A increases with a and with b, each alone.

Two facts carry them: g increases (g'(ρ) = (ρ - ln(1 + ρ))/ρ² > 0) and g(ρ)/ρ decreases
(its derivative has the sign of 2ρ - (ρ + 2)·ln(1 + ρ), negative since ln(1 + ρ) > 2ρ/(ρ + 2)
for ρ > 0, a standard inequality).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]


class LoopTiming(NamedTuple):
    """Period, its ideal-switch part and the two overshoots (arrays, SI units)."""

    period_s: Array
    ideal_period_s: Array
    overshoot_top_v: Array
    overshoot_bottom_v: Array

    @property
    def overshoot_v(self) -> Array:
        return np.asarray(self.overshoot_top_v + self.overshoot_bottom_v)

    @property
    def timing_share(self) -> Array:
        """1 - T_i/T: the share of the period set by the op amps' timing."""
        return np.asarray(1.0 - self.ideal_period_s / self.period_s)


def _gbw_delay(rho: Array, beta: Array, gbw: Array) -> Array:
    """t_g = g(ρ)/(2π·GBW·β), 0 for an infinite GBW (s)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lp = np.log1p(rho)
        g = lp - 1.0 + lp / rho
        out = g / (2.0 * math.pi * gbw * beta)
    return np.asarray(np.where(np.isinf(gbw), 0.0, out), dtype=float)


def loop_timing(
    k: Array | float,
    p: Array | float,
    span: Array | float,
    a: Array | float,
    b: Array | float,
    *,
    slew_rise: Array | float,
    slew_fall: Array | float,
    delay: Array | float,
    gbw: Array | float,
) -> LoopTiming:
    """The loop's timing with the drives a (falling ramp) and b (rising ramp) as independent
    inputs; see the module docstring for the formulas. With a + b = span it equals
    ``circuit.predict`` (tests hold them equal to 1e-12)."""
    k, p, span, a, b, sr, sf, td, gbw = (
        np.asarray(x, dtype=float) for x in (k, p, span, a, b, slew_rise, slew_fall, delay, gbw)
    )
    beta = k / (1.0 + k)
    with np.errstate(divide="ignore", invalid="ignore"):
        tg_r = _gbw_delay(sr * p / b, beta, gbw)
        tg_f = _gbw_delay(sf * p / a, beta, gbw)
    d_r = td + tg_r + span / sr / 2.0
    d_f = td + tg_f + span / sf / 2.0
    ideal = span * span * p / (a * b)
    period = ideal + span * (d_r / a + d_f / b)
    top = (b * k / p) * (td + tg_r + b / (2.0 * sr))
    bottom = (a * k / p) * (td + tg_f + a / (2.0 * sf))
    return LoopTiming(period, ideal, top, bottom)


class OpAmpLoop(NamedTuple):
    """One op amp on the spec's rails, as the bounds need it (arrays over op amps or rows)."""

    vh: Array
    vl: Array
    slew_rise: Array
    slew_fall: Array
    delay: Array
    gbw: Array
    ve_lo: Array  # integrator error voltage range over the R3 values a row can take (V)
    ve_hi: Array

    def take(self, idx: NDArray[np.int64]) -> OpAmpLoop:
        return OpAmpLoop(*(np.asarray(x)[idx] for x in self))


class Bounds(NamedTuple):
    """Lower and upper values of one quantity at each point."""

    lo: Array
    hi: Array


def _timing(loop: OpAmpLoop, k: Array, p: Array, a: Array, b: Array) -> LoopTiming:
    return loop_timing(
        k,
        p,
        loop.vh + loop.vl,
        a,
        b,
        slew_rise=loop.slew_rise,
        slew_fall=loop.slew_fall,
        delay=loop.delay,
        gbw=loop.gbw,
    )


def _weak(loop: OpAmpLoop) -> tuple[Array, Array]:
    """The smallest drives (a, b) over the Ve range: a = VH - Ve_hi, b = VL + Ve_lo."""
    return np.asarray(loop.vh - loop.ve_hi), np.asarray(loop.vl + loop.ve_lo)


def _strong(loop: OpAmpLoop) -> tuple[Array, Array]:
    """The largest drives: a = VH - Ve_lo, b = VL + Ve_hi."""
    return np.asarray(loop.vh - loop.ve_lo), np.asarray(loop.vl + loop.ve_hi)


def period_bounds(loop: OpAmpLoop, k: Array, p: Array) -> Bounds:
    """Bounds of the period at (k, P) over the Ve range (s).

    (M2) T = span·(span·P/(a·b) + d_r/a + d_f/b) falls with a: the first two terms directly,
    d_f through t_g,f, whose ρ_f = SR·P/a falls with a while g rises with ρ; likewise with b.
    So the weakest drives give the longest period and the strongest the shortest.
    """
    return Bounds(
        _timing(loop, k, p, *_strong(loop)).period_s, _timing(loop, k, p, *_weak(loop)).period_s
    )


def amplitude_bounds(loop: OpAmpLoop, k: Array, p_lo: Array, p_hi: Array) -> Bounds:
    """Bounds of the triangle's peak-to-peak over P in [p_lo, p_hi] and the Ve range (V).

    (M3) The top overshoot is k·(b·td + b²/(2·SR))/P + k·SR·[g(ρ)/ρ]/(2π·GBW·β) with
    ρ = SR·P/b: both terms fall as P grows (g(ρ)/ρ falls with ρ). (M4) Both rise with b
    (ρ falls as b grows); the bottom overshoot likewise with a. So the strongest drives at
    the smallest P give the largest amplitude, the weakest at the largest P the smallest.
    """
    span = loop.vh + loop.vl
    hi = _timing(loop, k, p_lo, *_strong(loop))
    lo = _timing(loop, k, p_hi, *_weak(loop))
    return Bounds(k * span + lo.overshoot_v, k * span + hi.overshoot_v)


def timing_share_floor(loop: OpAmpLoop, k: Array, p_lo: Array, p_hi: Array) -> Array:
    """A lower bound of 1 - T_i/T over P in [p_lo, p_hi] and the Ve range.

    s = D/(T_i + D) with D = span·(d_r/a + d_f/b): s rises with D and falls with T_i. D is
    smallest at the smallest P and the strongest drives, T_i largest at the largest P and the
    weakest drives."""
    strong = _timing(loop, k, p_lo, *_strong(loop))
    weak = _timing(loop, k, p_hi, *_weak(loop))
    d_min = strong.period_s - strong.ideal_period_s
    return np.asarray(d_min / (weak.ideal_period_s + d_min))


def window(loop: OpAmpLoop, k: Array, t_min: Array, t_max: Array) -> Bounds:
    """The range of P outside which the period cannot lie in [t_min, t_max], for any R3.

    By (M1) both period bounds rise with P, so the answer is [P_a, P_b] with
    T_hi(P_a) = t_min and T_lo(P_b) = t_max (``lowest_p``, ``highest_p``).
    """
    return Bounds(lowest_p(loop, k, t_min), highest_p(loop, k, t_max))


def lowest_p(loop: OpAmpLoop, k: Array, t_min: Array) -> Array:
    """P_a with T_hi(P) < t_min for every P < P_a (0 when the delays alone reach t_min).

    Newton's method finds the root; the end is then pushed down until T_hi(P_a) < t_min holds
    as computed, so every row left out is outside the band (a row on the edge stays in)."""
    t_min = np.asarray(t_min, dtype=float)
    p = _root(lambda x: period_bounds(loop, k, x).hi, t_min, loop)
    step = 1e-12
    for _ in range(60):
        bad = period_bounds(loop, k, p).hi >= t_min
        if not bad.any():
            break
        p = np.where(bad, p * (1 - step), p)
        step = min(2 * step, 0.5)
    # Where no push settles it, keep every P below: a wider window only costs rows.
    return np.asarray(np.where(period_bounds(loop, k, p).hi >= t_min, 0.0, p))


def highest_p(loop: OpAmpLoop, k: Array, t_max: Array) -> Array:
    """P_b with T_lo(P) > t_max for every P > P_b (inf when no root is found)."""
    t_max = np.asarray(t_max, dtype=float)
    p = _root(lambda x: period_bounds(loop, k, x).lo, t_max, loop)
    step = 1e-12
    for _ in range(60):
        bad = period_bounds(loop, k, p).lo <= t_max
        if not bad.any():
            break
        p = np.where(bad, p * (1 + step), p)
        step = min(2 * step, 0.5)
    return np.asarray(np.where(period_bounds(loop, k, p).lo <= t_max, np.inf, p))


def _root(period: Callable[[Array], Array], target: Array, loop: OpAmpLoop) -> Array:
    """P with period(P) = target, by Newton steps in ln P (period rises with P)."""
    a_min, b_min = _weak(loop)
    span = loop.vh + loop.vl
    # Start at the ideal-switch P for the target: P = T·a·b/span² (an over-estimate).
    p = np.maximum(target * a_min * b_min / (span * span), 1e-30)
    for _ in range(60):
        t = period(p)
        t2 = period(p * (1 + 1e-6))
        slope = (t2 - t) / 1e-6  # dT/d ln P
        step = np.where(slope > 0, (target - t) / np.where(slope > 0, slope, 1.0), 0.0)
        step = np.clip(step, -2.0, 2.0)
        p = p * np.exp(step)
        if np.all(np.abs(step) < 1e-13):
            break
    return np.asarray(p, dtype=float)


def overshoot_fraction_cap(max_timing_share: float, t_max_over_t_min: float) -> float:
    """An upper bound of ε = (A - k·span)/(k·span) for every row whose timing share is at
    most s and whose period lies in a band with T_max/T_min = r: ε ≤ s·r/(1 - s).

    Each overshoot is the ramp's slope times td + t_g + V/(2·SR) ≤ d (V ≤ span), so
    A - k·span ≤ (k/P)·(b·d_r + a·d_f) = (k/P)·a·b·D/span with D = T - T_i ≤ s·T_max; and
    T_i = span²·P/(a·b) ≥ (1 - s)·T_min. Dividing gives the bound, whatever a, b and P.
    """
    s = max_timing_share
    return s * t_max_over_t_min / (1.0 - s)
