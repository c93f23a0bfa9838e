"""The loop's timing with the integrator's two drives as independent inputs: the core that
``physics.predict`` evaluates, and that ``search.bounds`` bounds.

Notation (volts from the reference, seconds): k = R1/R2, RC = R3·C1, span = VH + VL, a the
drive of the falling ramp (VH - Ve in the circuit), b the drive of the rising ramp (VL + Ve).
The integrator's terms (``integrator.integrator_terms``): RC' = RC·(1 + ε) and lag τi; each
comparator edge's times from its threshold crossing (``transition.switch_times``): centroid c,
mid-swing crossing m and overshoot time o (rising edge at the top turn: slope b/RC', drive b;
falling edge at the bottom: slope a/RC', drive a); d = c + τi the edge's effective delay:

- period T = span·(span·k·RC'/(a·b) + d_r/a + d_f/b); ideal part T_i = span²·k·RC/(a·b)
  (instant switching, ideal integrator, same drives)
- high time t_H = (k·span·RC' + b·d_r)/a + d_r + m_f - m_r (t_H + t_L = T when a + b = span)
- overshoots: top (b·(o_r + τi) - A_r)/RC', bottom (a·(o_f + τi) - A_f)/RC', A the lag
  area (``integrator.lag_overshoot_area``, 0 ≤ A ≤ drive·τi)

With a + b = span this is exactly ``predict``'s model (it calls this function).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from tristock.circuits.integrator import integrator_terms, lag_overshoot_area
from tristock.circuits.transition import centroid_times, switch_times

FloatArray = npt.NDArray[np.float64]
ArrayLike = float | npt.ArrayLike


class LoopTiming(NamedTuple):
    """The loop's timing (arrays, SI units); see the module docstring."""

    period_s: FloatArray
    high_s: FloatArray
    ideal_period_s: FloatArray
    overshoot_top_v: FloatArray
    overshoot_bottom_v: FloatArray
    #: the overshoots without the lag areas: upper bounds of them (the areas are >= 0)
    reach_top_v: FloatArray
    reach_bottom_v: FloatArray
    #: the overshoots less the whole lag: lower bounds of them (each area <= drive·τi)
    floor_top_v: FloatArray
    floor_bottom_v: FloatArray
    rc_eff_s: FloatArray
    delay_rise_s: FloatArray
    delay_fall_s: FloatArray

    @property
    def overshoot_v(self) -> FloatArray:
        return np.asarray(self.overshoot_top_v + self.overshoot_bottom_v)

    @property
    def timing_share(self) -> FloatArray:
        """1 - T_i/T: the share of the period set by the op amps' timing."""
        return np.asarray(1.0 - self.ideal_period_s / self.period_s)


class _Loop(NamedTuple):
    """The arguments of ``loop_timing`` as float arrays of one shape, with the integrator's
    terms and both edges' drives and slews stacked along a first axis (rising: the top turn,
    drive b; falling: drive a)."""

    k: FloatArray
    rc: FloatArray
    span: FloatArray
    a: FloatArray
    b: FloatArray
    delay: FloatArray
    gbw: FloatArray
    rc_eff: FloatArray
    lag: FloatArray
    drive: FloatArray
    slew: FloatArray

    @property
    def ramp(self) -> FloatArray:
        """k·span·RC' (V·s)."""
        return self.k * self.span * self.rc_eff


def _loop(*args: ArrayLike) -> _Loop:
    """``_Loop`` of (k, rc, span, a, b, slew_rise, slew_fall, delay, gbw, integrator_gbw),
    broadcast together (views, not copies, where they have the shape already)."""
    values = [np.asarray(x, dtype=float) for x in args]
    shape = np.broadcast(*values).shape
    if any(v.shape != shape for v in values):
        values = list(np.broadcast_arrays(*values))
    k, rc, span, a, b, sr, sf, td, gbw, igbw = values
    slow, lag = integrator_terms(rc, igbw)
    # one shape: np.array gives np.stack's values with less overhead
    return _Loop(k, rc, span, a, b, td, gbw, rc * slow, lag, np.array([b, a]), np.array([sr, sf]))


def _period(lp: _Loop, ramp: FloatArray, d_r: FloatArray, d_f: FloatArray) -> FloatArray:
    """T = span·(ramp/(a·b) + d_r/a + d_f/b) (s), ramp = k·span·RC' (``_Loop.ramp``): the one
    formula both callers use."""
    period: FloatArray = lp.span * (ramp / (lp.a * lp.b) + d_r / lp.a + d_f / lp.b)
    return period


def loop_timing(
    k: ArrayLike,
    rc: ArrayLike,
    span: ArrayLike,
    a: ArrayLike,
    b: ArrayLike,
    *,
    slew_rise: ArrayLike,
    slew_fall: ArrayLike,
    delay: ArrayLike,
    gbw: ArrayLike,
    integrator_gbw: ArrayLike,
) -> LoopTiming:
    """``LoopTiming`` of the loop, vectorised over broadcast arguments (see the module
    docstring). ``gbw`` is the comparator's gain-bandwidth, ``integrator_gbw`` the
    integrator's (Hz)."""
    lp = _loop(k, rc, span, a, b, slew_rise, slew_fall, delay, gbw, integrator_gbw)
    k, rc, span, a, b = lp.k, lp.rc, lp.span, lp.a, lp.b
    rc_eff, lag, drive, ramp = lp.rc_eff, lp.lag, lp.drive, lp.ramp
    edges = switch_times(k, drive / rc_eff, span, drive, lp.slew, lp.gbw, lp.delay)
    (c_r, c_f), (m_r, m_f), (o_r, o_f) = edges
    d_r = c_r + lag
    d_f = c_f + lag
    high = (ramp + b * d_r) / a + d_r + m_f - m_r
    ideal = span * k * span * rc / (a * b)
    area_r, area_f = lag_overshoot_area(drive, np.array([a, b]), lp.slew, lag)
    return LoopTiming(
        _period(lp, ramp, d_r, d_f),
        high,
        ideal,
        (b * (o_r + lag) - area_r) / rc_eff,
        (a * (o_f + lag) - area_f) / rc_eff,
        b * (o_r + lag) / rc_eff,
        a * (o_f + lag) / rc_eff,
        b * o_r / rc_eff,
        a * o_f / rc_eff,
        rc_eff,
        d_r,
        d_f,
    )


def loop_period(
    k: ArrayLike,
    rc: ArrayLike,
    span: ArrayLike,
    a: ArrayLike,
    b: ArrayLike,
    *,
    slew_rise: ArrayLike,
    slew_fall: ArrayLike,
    delay: ArrayLike,
    gbw: ArrayLike,
    integrator_gbw: ArrayLike,
) -> FloatArray:
    """``loop_timing(...).period_s`` alone, the same to the bit: only the edges' centroids
    are read from the edge table (``transition.centroid_times``), one look-up a point instead
    of three, and no lag area is computed."""
    lp = _loop(k, rc, span, a, b, slew_rise, slew_fall, delay, gbw, integrator_gbw)
    slope = lp.drive / lp.rc_eff
    c_r, c_f = centroid_times(lp.k, slope, lp.span, lp.slew, lp.gbw, lp.delay)
    return _period(lp, lp.ramp, c_r + lp.lag, c_f + lp.lag)
