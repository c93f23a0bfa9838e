"""The comparator-IC loop's physics: an op-amp integrator (U1, R3, C1) driving a comparator IC
(U2) with hysteresis from R1 and R2; an open-drain U2 is pulled up by R5 from V+.

Voltages are from the reference node (the integrator's + input and the comparator's - input);
SI units throughout (ohm, farad, volt, ampere, second, hertz).

The comparator's output (``stock.comparators``): a threshold crossing of its inputs moves the
output, after a transport delay, linearly between its two states, 10-90 % in ``rise``/``fall``
(the whole edge τ = rise/0.8), 50 % ``delay`` after the crossing. Its low state holds the
square node at -L = V- + VOL; its high state is a source Hs behind Rs: push-pull Hs = V+ -
headroom with Rs = 0, open-drain Hs = V+ through the pull-up Rs = R5. During an edge the square
node is the blend (1 - c)·v_high + c·(-L), c the edge's linear progress (the netlist realises
this with the transistor's conductance, ``netlist``).

Notation: k = R1/R2, R12 = R1 + R2, Ve = Vos1 + Ib1·R3 (the square level at which no current
reaches C1), den = 1 + Rs/R12 + Rs/R3. With the square node's KCL (pull-up, R1 + R2 to the
triangle vt, R3 to the integrator's input at Vos1) the high level follows the triangle:

    v_high(vt) = vs0 + γ·vt,   vs0 = (Hs + Rs·Vos1/R3)/den,   γ = (Rs/R12)/den

(push-pull: vs0 = Hs, γ = 0). The integrator (single pole, ωt = 2π·GBW; ``integrator``) sees
its source through R3 and, in the high state, the node's own resistance Ro = Rs ∥ R12:
ε = 1/(ωt·(R3 + Ro)·C1), RC' = R3·C1·(1 + ε), lag τi = 1/(ωt·(1 + ε)). The ramps:

- low state: dvt/dt = b/RC'_lo, b = L + Ve (a straight ramp up);
- high state: dvt/dt = -(p + q·vt), p = (vs0 - Ve)/RC'_hi, q = γ/RC'_hi (an exponential
  approach; a straight ramp when γ = 0).

The comparator trips where vt + k·vs = s, s = (1 + k)·(Vos2 + Ib2·(R1 ∥ R2)):
top th_hi = s + k·L (square low), bottom th_lo = (s - k·vs0)/(1 + k·γ) (square high).

Each edge acts on the integrator exactly like an instant switch at its centroid, ``delay``
after the crossing for a linear edge, plus the integrator's lag: d_r = delay + τi_hi,
d_f = delay + τi_lo. From the top crossing: v_hi* = th_hi + b·d_r/RC'_lo; the high state
takes t1 = ln((p + q·v_hi*)/(p + q·th_lo))/q to reach th_lo (``(v_hi* - th_lo)/p`` when
q = 0), ends d_f later at v_lo* = th_lo - (p + q·th_lo)·(1 - e^(-q·d_f))/q; the low state
lasts t_L = (v_hi* - v_lo*)·RC'_lo/b. So

    T = t1 + d_f + t_L,   high time t_H = t1 + d_r + m_f - m_r

with m the crossings of the square's mid level Vm (``square_mid_v``) on each edge:
m_r = delay + τr·((Vm + L)/(H_r + L) - 1/2), m_f = delay + τf·((H_f - Vm)/(H_f + L) - 1/2)
(H_r, H_f the high level at the triangle where each edge happens). The triangle overshoots
each threshold until the lagged square crosses Ve: past the crossing by the slope times
o = delay - τ/2 + τ·(share of the edge before Ve)/2 (the slope falls linearly to zero through
the edge), plus the lag's slope·τi less its area (``integrator.lag_overshoot_area``).
Within this model the figures are exact but for the triangle's slope (and the high level)
held constant through each edge, as in ``opamp_schmitt``.

The loop oscillates where L + Ve > 0, v_high(th_lo) > Ve and th_hi > th_lo (``loop_levels``,
``oscillates``: what ``predict`` checks before it raises); ``pull_up_source`` inverts
``high_level``'s vs0 for Hs (the search form carries a row's square level, not its rails).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.integrator import lag_overshoot_area
from tristock.circuits.topology import ArrayLike, FloatArray, Prediction
from tristock.stock.comparators import EDGE_SHARE

inf = math.inf


def _arrays(*values: ArrayLike) -> list[FloatArray]:
    return [np.asarray(v, dtype=float) for v in np.broadcast_arrays(*values)]


def high_level(
    r1: ArrayLike, r2: ArrayLike, r3: ArrayLike, high_v: ArrayLike, pull_up: ArrayLike,
    vos1: ArrayLike = 0.0,
) -> tuple[FloatArray, FloatArray]:  # fmt: skip
    """(vs0, γ): the high state's square level is vs0 + γ·vt (V from the reference, vt the
    triangle); see the module docstring. ``pull_up`` = 0 for a push-pull output."""
    r1a, r2a, r3a, hs, rs, v1 = _arrays(r1, r2, r3, high_v, pull_up, vos1)
    den = 1.0 + rs / (r1a + r2a) + rs / r3a
    return (hs + rs * v1 / r3a) / den, (rs / (r1a + r2a)) / den


def pull_up_source(
    r1: ArrayLike, r2: ArrayLike, r3: ArrayLike, square_v: ArrayLike, pull_up: ArrayLike,
    vos1: ArrayLike = 0.0,
) -> FloatArray:  # fmt: skip
    """The inverse of ``high_level``'s vs0: the high source Hs (V from the reference) behind
    ``pull_up`` whose square level with the triangle at the reference is ``square_v``:
    Hs = vs0·den - Rs·Vos1/R3 (den as in ``high_level``); Hs = vs0 for a push-pull output
    (``pull_up`` = 0)."""
    r1a, r2a, r3a, vs0, rs, v1 = _arrays(r1, r2, r3, square_v, pull_up, vos1)
    den = 1.0 + rs / (r1a + r2a) + rs / r3a
    return np.asarray(vs0 * den - rs * v1 / r3a, dtype=float)


class LoopLevels(NamedTuple):
    """Where the loop turns and what drives it (V from the reference; module docstring):
    Ve, the high state's vs0 and γ, the thresholds, the rising drive b = L + Ve and the
    falling drive at the bottom threshold, v_high(th_lo) - Ve (its smallest before the
    edge)."""

    k: FloatArray
    ve: FloatArray
    vs0: FloatArray
    gamma: FloatArray
    th_hi: FloatArray
    th_lo: FloatArray
    rise_drive: FloatArray
    fall_drive: FloatArray

    @property
    def oscillates(self) -> NDArray[np.bool_]:
        """Both drives reach their thresholds: b > 0, v_high(th_lo) > Ve, th_hi > th_lo."""
        with np.errstate(invalid="ignore"):
            return np.asarray(
                (self.rise_drive > 0.0) & (self.fall_drive > 0.0) & (self.th_hi > self.th_lo)
            )


def loop_levels(
    r1: FloatArray, r2: FloatArray, r3: FloatArray, high_v: FloatArray, low_v: FloatArray,
    pull_up: FloatArray, vos1: FloatArray, ib1: FloatArray, vos2: FloatArray, ib2: FloatArray,
) -> LoopLevels:  # fmt: skip
    """``LoopLevels`` of broadcast arrays (the arguments as ``predict`` takes them)."""
    k = r1 / r2
    ve = vos1 + ib1 * r3
    vs0, gamma = high_level(r1, r2, r3, high_v, pull_up, vos1)
    shift = (1.0 + k) * (vos2 + ib2 * r1 * r2 / (r1 + r2))
    th_lo = (shift - k * vs0) / (1.0 + k * gamma)
    return LoopLevels(
        k, ve, vs0, gamma, shift + k * low_v, th_lo, low_v + ve, vs0 + gamma * th_lo - ve
    )


def oscillates(
    r1: ArrayLike, r2: ArrayLike, r3: ArrayLike, high_v: ArrayLike, low_v: ArrayLike, *,
    pull_up: ArrayLike = 0.0, vos1: ArrayLike = 0.0, ib1: ArrayLike = 0.0,
    vos2: ArrayLike = 0.0, ib2: ArrayLike = 0.0,
) -> NDArray[np.bool_]:  # fmt: skip
    """Where ``predict`` gives an oscillation rather than raising ValueError: the levels
    positive and finite and both drives past their thresholds (``LoopLevels.oscillates``);
    arguments as ``predict``'s (the resistors must be positive)."""
    R1, R2, R3, HS, L, RS, V1, I1, V2, I2 = _arrays(
        r1, r2, r3, high_v, low_v, pull_up, vos1, ib1, vos2, ib2
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        levels = loop_levels(R1, R2, R3, HS, L, RS, V1, I1, V2, I2)
        finite = np.isfinite(HS) & np.isfinite(L) & (HS > 0.0) & (L > 0.0)
    return np.asarray(finite & levels.oscillates)


def _high_ramp(p: FloatArray, q: FloatArray, start: FloatArray, end: FloatArray) -> FloatArray:
    """Time (s) for dvt/dt = -(p + q·vt) to fall from ``start`` to ``end``."""
    with np.errstate(divide="ignore", invalid="ignore"):
        q_safe = np.where(q > 0.0, q, 1.0)
        curved = np.log1p(q_safe * (start - end) / (p + q_safe * end)) / q_safe
    return np.asarray(np.where(q > 0.0, curved, (start - end) / p), dtype=float)


def _high_drift(p: FloatArray, q: FloatArray, start: FloatArray, dt: FloatArray) -> FloatArray:
    """Where dvt/dt = -(p + q·vt) takes the triangle from ``start`` in ``dt`` seconds."""
    with np.errstate(divide="ignore", invalid="ignore"):
        q_safe = np.where(q > 0.0, q, 1.0)
        curved = start + (p + q_safe * start) * np.expm1(-q_safe * dt) / q_safe
    return np.asarray(np.where(q > 0.0, curved, start - p * dt), dtype=float)


def loop_period(
    th_hi: FloatArray, th_lo: FloatArray, b: FloatArray, rc_lo: FloatArray,
    p: FloatArray, q: FloatArray, d_r: FloatArray, d_f: FloatArray,
) -> tuple[FloatArray, FloatArray, FloatArray]:  # fmt: skip
    """(T, t1, v_hi*) of the effective-switch loop (module docstring), seconds and volts."""
    v_top = th_hi + b * d_r / rc_lo
    t1 = _high_ramp(p, q, v_top, th_lo)
    v_bottom = _high_drift(p, q, th_lo, d_f)
    return t1 + d_f + (v_top - v_bottom) * rc_lo / b, t1, v_top


def predict(
    r1: ArrayLike,
    r2: ArrayLike,
    r3: ArrayLike,
    c1: ArrayLike,
    high_v: ArrayLike,
    low_v: ArrayLike,
    *,
    pull_up: ArrayLike = 0.0,
    delay: ArrayLike = 0.0,
    rise: ArrayLike = 0.0,
    fall: ArrayLike = 0.0,
    gbw: ArrayLike = inf,
    vos1: ArrayLike = 0.0,
    ib1: ArrayLike = 0.0,
    vos2: ArrayLike = 0.0,
    ib2: ArrayLike = 0.0,
) -> Prediction:
    """The comparator-IC loop's model, vectorised (numpy broadcasting over every argument).

    ``high_v`` = Hs and ``low_v`` = L (V from the reference: the high source, V+ - headroom for
    push-pull or V+ for open-drain, and the low level's distance below the reference);
    ``pull_up`` = Rs (0 for push-pull); ``delay`` to 50 % of the step and 10-90 % ``rise``
    and ``fall`` (s) of U2; ``gbw`` (Hz), ``vos1``, ``ib1`` of the integrator's op amp;
    ``vos2``, ``ib2`` of U2. Formulas: the module docstring. ``square_high_v`` is the high
    level with the triangle at its midpoint between the thresholds. Raises ValueError when a
    drive cannot reach its threshold (the loop latches).
    """
    R1, R2, R3, C1, HS, L, RS, TD, TR, TF, GBW, V1, I1, V2, I2 = _arrays(
        r1, r2, r3, c1, high_v, low_v, pull_up, delay, rise, fall, gbw, vos1, ib1, vos2, ib2
    )
    scalar = R1.ndim == 0
    for name, x in (("r1", R1), ("r2", R2), ("r3", R3), ("c1", C1), ("high_v", HS), ("low_v", L)):
        if not np.all(np.isfinite(x) & (x > 0.0)):
            raise ValueError(f"{name}: every value must be > 0 and finite")
    if not (np.all(RS >= 0.0) and np.all(TD >= 0.0) and np.all(TR >= 0.0) and np.all(TF >= 0.0)):
        raise ValueError("pull_up, delay, rise, fall: every value must be >= 0")
    levels = loop_levels(R1, R2, R3, HS, L, RS, V1, I1, V2, I2)
    ve, vs0, gamma, th_hi, th_lo = levels.ve, levels.vs0, levels.gamma, levels.th_hi, levels.th_lo
    r_node = np.where(RS > 0.0, RS * (R1 + R2) / np.where(RS > 0.0, RS + R1 + R2, 1.0), 0.0)
    with np.errstate(divide="ignore"):
        wt = 2.0 * math.pi * GBW
        eps_lo = 1.0 / (wt * R3 * C1)
        eps_hi = 1.0 / (wt * (R3 + r_node) * C1)
    lag_lo, lag_hi = 1.0 / (wt * (1.0 + eps_lo)), 1.0 / (wt * (1.0 + eps_hi))
    rc_lo, rc_hi = R3 * C1 * (1.0 + eps_lo), R3 * C1 * (1.0 + eps_hi)
    b = levels.rise_drive
    p, q = (vs0 - ve) / rc_hi, gamma / rc_hi
    if not np.all(levels.oscillates):
        raise ValueError(
            "high_v/low_v: a square level does not drive the triangle past its threshold "
            "(the integrator's error Vos1 + Ib1·R3 or the pull-up's sag is too large)"
        )
    d_r, d_f = TD + lag_hi, TD + lag_lo
    period, t1, v_top = loop_period(th_hi, th_lo, b, rc_lo, p, q, d_r, d_f)
    ideal, _, _ = loop_period(
        th_hi, th_lo, b, R3 * C1, p * (1 + eps_hi), q * (1 + eps_hi), 0 * TD, 0 * TD
    )

    tau_r, tau_f = TR / EDGE_SHARE, TF / EDGE_SHARE
    h_mid = vs0 + gamma * (th_hi + th_lo) / 2.0
    v_mid = (h_mid - L) / 2.0
    h_r = vs0 + gamma * (th_hi + b * TD / rc_lo)  # the high level as the rising edge happens
    bottom_slope = p + q * th_lo
    h_f = vs0 + gamma * (th_lo - bottom_slope * TD)
    m_r = TD + tau_r * ((v_mid + L) / (h_r + L) - 0.5)
    m_f = TD + tau_f * ((h_f - v_mid) / (h_f + L) - 0.5)
    t_high = t1 + d_r + m_f - m_r

    # the old slope holds until the edge starts, then falls linearly to 0 where the square
    # crosses Ve: the overshoot is the slope times the edge's start plus half that stretch
    o_r = TD + tau_r * ((ve + L) / (h_r + L) / 2.0 - 0.5)
    o_f = TD + tau_f * ((h_f - ve) / (h_f + L) / 2.0 - 0.5)
    with np.errstate(divide="ignore"):
        slew_r = np.where(tau_r > 0.0, (h_r + L) / np.where(tau_r > 0.0, tau_r, 1.0), inf)
        slew_f = np.where(tau_f > 0.0, (h_f + L) / np.where(tau_f > 0.0, tau_f, 1.0), inf)
    area_r = lag_overshoot_area(b, h_r - ve, slew_r, lag_hi)
    area_f = lag_overshoot_area(h_f - ve, b, slew_f, lag_lo)
    peak_hi = th_hi + (b * (o_r + lag_hi) - area_r) / rc_lo
    peak_lo = th_lo - bottom_slope * (o_f + lag_lo) + area_f / rc_hi
    drive_hi = h_f - ve
    fields = (
        1.0 / period,
        period,
        t_high / period,
        peak_hi - peak_lo,
        (peak_hi + peak_lo) / 2.0,
        h_mid,
        -L,
        th_hi,
        th_lo,
        peak_hi,
        peak_lo,
        np.maximum(b / rc_lo, p + q * v_top),
        (d_r * b + d_f * drive_hi) / (b + drive_hi),
        1.0 - ideal / period,
    )
    if scalar:
        return Prediction(*(float(x) for x in fields))
    return Prediction(*(np.asarray(x, dtype=float) for x in fields))
