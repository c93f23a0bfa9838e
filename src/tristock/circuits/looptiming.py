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


def _broadcast(*args: ArrayLike) -> list[FloatArray]:
    """The arguments as float arrays of one shape (views, not copies, where they have it)."""
    values = [np.asarray(x, dtype=float) for x in args]
    shape = np.broadcast(*values).shape
    if any(v.shape != shape for v in values):
        values = list(np.broadcast_arrays(*values))
    return values


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
    k, rc, span, a, b, sr, sf, td, gbw, igbw = _broadcast(
        k, rc, span, a, b, slew_rise, slew_fall, delay, gbw, integrator_gbw
    )
    slow, lag = integrator_terms(rc, igbw)
    rc_eff = rc * slow
    # both edges at once, along a first axis: rising (top turn, drive b), falling (drive a)
    drive = np.array([b, a])  # one shape: the same as np.stack, with less overhead
    slew = np.array([sr, sf])
    edges = switch_times(k, drive / rc_eff, span, drive, slew, gbw, td)
    (c_r, c_f), (m_r, m_f), (o_r, o_f) = edges
    d_r = c_r + lag
    d_f = c_f + lag
    ramp = k * span * rc_eff
    period = span * (ramp / (a * b) + d_r / a + d_f / b)
    high = (ramp + b * d_r) / a + d_r + m_f - m_r
    ideal = span * k * span * rc / (a * b)
    area_r, area_f = lag_overshoot_area(drive, np.array([a, b]), slew, lag)
    return LoopTiming(
        period,
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
    k, rc, span, a, b, sr, sf, td, gbw, igbw = _broadcast(
        k, rc, span, a, b, slew_rise, slew_fall, delay, gbw, integrator_gbw
    )
    slow, lag = integrator_terms(rc, igbw)
    rc_eff = rc * slow
    drive = np.array([b, a])
    c_r, c_f = centroid_times(k, drive / rc_eff, span, np.array([sr, sf]), gbw, td)
    ramp = k * span * rc_eff
    period: FloatArray = span * (ramp / (a * b) + (c_r + lag) / a + (c_f + lag) / b)
    return period
