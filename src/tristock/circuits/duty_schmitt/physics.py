"""The set-duty loop's model, vectorised: the op-amp Schmitt loop with R3 split in two
steered paths, R3A through D3 (carries the integrator's current while the square is high)
and R3B through D4 (while it is low). Volts from the reference; SI units.

Notation: k = R1/R2; VH, VL the square's levels (the op amp's rails less headroom); the
integrator's - pin sits at Vos1 and draws Ib1; a forward diode drops V(I) = v0 + m·ln I + r·I
(``circuits.diode``; m = N·Vt). The branch currents solve VH - Vos1 = V_D3(I_A) + R3A·I_A
and VL + Vos1 = V_D4(I_B) + R3B·I_B: the drives are VH - Vf and VL - Vf, each Vf at its own
current. The triangle falls at I_A/C1 and rises at I_B/C1 (less and plus Ib1/C1), so the high
share is about I_B/(I_A + I_B) ≈ R3A/(R3A + R3B) and the period C1·k·(VH + VL)·(1/I_A + 1/I_B).

- Thresholds: as in ``opamp_schmitt``: +VL·k + s at the top, -VH·k + s at the bottom,
  s = (1 + k)·(Vos2 + Ib2·(R1 ∥ R2)).
- Edges: the comparator's output edge is that of ``opamp_schmitt`` (transport delay, slew,
  finite-GBW build-up through R1/R2: ``transition``); G(L) the mean time at which the output
  has passed the levels 0..L of its edge. As the square sweeps, each branch's current follows
  it through the diode: a branch turning off (or on) acts on the integrator exactly like an
  instant step at the mean passage time over the levels weighted by -dI/dv. For a linear
  edge that weight is, exactly, the uniform one over y = (R + RS)·I + 2·m levels from the
  start (the charge ∫ I dv = m·I + (R + RS)·I²/2), and the model takes that same interval
  for a curved (build-up) edge: turn-off at G(y), turn-on at the mean over [span - y, span]
  = (span·G(span) - (span - y)·G(span - y))/y. The square's mid-swing crossing is v(span/2)
  (``transition.scaled_level_time``).
- Integrator: a single-pole op amp slows each branch's ramp by 1 + ε, ε = 1/(ωt·R_dyn·C1),
  R_dyn = R + RS + m/I, and delays each step by τi = 1/(ωt·(1 + ε)) (``integrator``).
- Period, t from the bottom crossing: the triangle after the falling edge is
  th_lo - I_A'·t_A/C1 + I_B'·(t - t_B)/C1 + Ib1·t/C1 (t_A, t_B the branches' step times), so
  t_top = (C1·Δ + I_A'·t_A + I_B'·t_B)/(I_B' + Ib1) with Δ = th_hi - th_lo; likewise from the
  top; T the sum; high time T + m_f - t_top - m_r; peaks th_lo - I_A'·t_A/C1 and
  th_hi + I_B'·t_B/C1 (the dead band between the branches lets the integrator's lag settle).

Within this model the period is exact but for the triangle's slope held through each edge and
the diode weight taken as uniform on a curved edge (both below 1e-4 for realistic parts).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tristock.circuits.diode import forward_chain, saturation_current
from tristock.circuits.edgetable import LN_MU
from tristock.circuits.integrator import integrator_terms
from tristock.circuits.topology import FloatArray, Prediction, Value
from tristock.circuits.transition import scaled_level_time, scaled_mean_time


@dataclass(frozen=True)
class DutyPoint:
    """Every input of ``predict``, floats or broadcastable arrays (Ω, F, V, V/s, s, Hz, A):
    the op amp's terms (both channels), D3 and D4 as vf (at 1 mA) and series rs;
    ``vt_therm`` the thermal voltage."""

    r1: Value
    r2: Value
    r3a: Value
    r3b: Value
    c1: Value
    v_pos: Value
    v_neg: Value
    swing_pos: Value
    swing_neg: Value
    slew_rise: Value
    slew_fall: Value
    delay: Value
    gbw: Value
    vos1: Value
    ib1: Value
    vos2: Value
    ib2: Value
    vf3: Value
    rs3: Value
    vf4: Value
    rs4: Value
    vt_therm: Value


@dataclass(frozen=True)
class Edge:
    """One comparator edge's level-passage times (s from the threshold crossing): the triangle's
    slope before the turn, the output's span, slew, GBW and transport delay."""

    k: FloatArray
    slope: FloatArray
    span: FloatArray
    slew: FloatArray
    gbw: FloatArray
    delay: FloatArray

    def scales(self) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
        """(finite GBW?, λ, μ, D) of ``transition`` (λ = β·2π·GBW, μ = slope/(k·SR))."""
        finite = np.isfinite(self.gbw)
        lam = self.k / (1.0 + self.k) * 2.0 * math.pi * np.where(finite, self.gbw, 1.0)
        sr = np.where(finite, self.slew, 1.0)
        mu = np.minimum(self.slope / (self.k * sr), math.exp(LN_MU[-1]))
        return finite, lam, mu, lam * self.delay

    def mean_time(self, level: FloatArray) -> FloatArray:
        """G(L): the mean time at which the output passes the levels 0..L (V) of its edge."""
        finite, lam, mu, scaled_delay = self.scales()
        with np.errstate(divide="ignore", invalid="ignore"):
            linear = self.delay + 0.5 * level / self.slew
            sr = np.where(finite, self.slew, 1.0)
            built = self.delay + scaled_mean_time(mu, scaled_delay, lam * level / sr) / lam
        return np.asarray(np.where(finite, built, linear))

    def interval_time(self, low: FloatArray, high: FloatArray) -> FloatArray:
        """Mean passage time over the levels [low, high] (V from the edge's start)."""
        low = np.maximum(low, 0.0)
        top = high * self.mean_time(high)
        bottom = np.where(low > 0.0, low * self.mean_time(np.maximum(low, 1e-12)), 0.0)
        return np.asarray((top - bottom) / (high - low))

    def mid_time(self) -> FloatArray:
        """When the output crosses mid-swing (s)."""
        finite, lam, mu, scaled_delay = self.scales()
        with np.errstate(divide="ignore", invalid="ignore"):
            linear = self.delay + 0.5 * self.span / self.slew
            sr = np.where(finite, self.slew, 1.0)
            built = (
                self.delay + scaled_level_time(mu, scaled_delay, 0.5 * lam * self.span / sr) / lam
            )
        return np.asarray(np.where(finite, built, linear))


def square_levels_of(p: DutyPoint, v_ref: float | None) -> tuple[FloatArray, FloatArray]:
    """(VH, VL) from the reference (V), as ``opamp_schmitt``: rails less headroom."""
    v_pos = np.asarray(p.v_pos, dtype=float)
    v_neg = np.asarray(p.v_neg, dtype=float)
    ref = v_ref if v_ref is not None else np.where(v_neg < 0.0, 0.0, (v_pos + v_neg) / 2.0)
    return v_pos - p.swing_pos - ref, ref - (v_neg + p.swing_neg)


def branch_currents(p: DutyPoint, v_ref: float | None) -> tuple[FloatArray, FloatArray]:
    """(I_A, I_B): the integrator's current through R3A and D3 with the square high, through
    D4 and R3B with it low (A), each with the reverse leakage IS of the other branch's diode
    added (a small Schottky leaks about 1 % of a 200 µA branch current)."""
    vh, vl = square_levels_of(p, v_ref)
    vos1 = np.asarray(p.vos1, dtype=float)
    i_a = forward_chain(p.vf3, p.rs3, p.vt_therm).current(vh - vos1, p.r3a)
    i_b = forward_chain(p.vf4, p.rs4, p.vt_therm).current(vl + vos1, p.r3b)
    # the other branch's diode is reverse-biased by far more than N·Vt: it leaks IS the same way
    leak_a = saturation_current(p.vf4, p.rs4, p.vt_therm)
    leak_b = saturation_current(p.vf3, p.rs3, p.vt_therm)
    return np.asarray(i_a + leak_a), np.asarray(i_b + leak_b)


def predict_point(p: DutyPoint, v_ref: float | None, control: str = "series") -> Prediction:
    """The set-duty loop's prediction at ``p`` (see the module notes); no pot (``control``
    unused)."""
    del control
    vh, vl = square_levels_of(p, v_ref)
    r1, r2 = np.asarray(p.r1, dtype=float), np.asarray(p.r2, dtype=float)
    c1 = np.asarray(p.c1, dtype=float)
    k = r1 / r2
    i_a, i_b = branch_currents(p, v_ref)
    d3, d4 = forward_chain(p.vf3, p.rs3, p.vt_therm), forward_chain(p.vf4, p.rs4, p.vt_therm)
    r_a = np.asarray(p.r3a, dtype=float) + np.asarray(d3.r)
    r_b = np.asarray(p.r3b, dtype=float) + np.asarray(d4.r)
    gbw = np.asarray(p.gbw, dtype=float)
    slow_a, lag_a = integrator_terms((r_a + np.asarray(d3.m) / i_a) * c1, gbw)
    slow_b, lag_b = integrator_terms((r_b + np.asarray(d4.m) / i_b) * c1, gbw)
    ia, ib = i_a / slow_a, i_b / slow_b
    ib1 = np.asarray(p.ib1, dtype=float)
    span = vh + vl
    forward_a = i_a - saturation_current(p.vf4, p.rs4, p.vt_therm)
    forward_b = i_b - saturation_current(p.vf3, p.rs3, p.vt_therm)
    y_a = r_a * forward_a + 2.0 * np.asarray(d3.m)
    y_b = r_b * forward_b + 2.0 * np.asarray(d4.m)
    args = (k, span, np.asarray(p.delay, dtype=float))
    fall = Edge(k, (ia - ib1) / c1, span, np.asarray(p.slew_fall, dtype=float), gbw, args[2])
    rise = Edge(k, (ib + ib1) / c1, span, np.asarray(p.slew_rise, dtype=float), gbw, args[2])
    t_a1 = fall.mean_time(y_a) + lag_a
    t_b1 = fall.interval_time(span - y_b, span) + lag_b
    t_b2 = rise.mean_time(y_b) + lag_b
    t_a2 = rise.interval_time(span - y_a, span) + lag_a
    m_f, m_r = fall.mid_time(), rise.mid_time()

    shift = (1.0 + k) * (p.vos2 + np.asarray(p.ib2, dtype=float) * r1 * r2 / (r1 + r2))
    th_hi, th_lo = vl * k + shift, -vh * k + shift
    hysteresis = th_hi - th_lo
    t_top = (c1 * hysteresis + ia * t_a1 + ib * t_b1) / (ib + ib1)
    t_bottom = (c1 * hysteresis + ib * t_b2 + ia * t_a2) / (ia - ib1)
    period = t_top + t_bottom
    high = period + m_f - t_top - m_r
    ideal = c1 * hysteresis * (1.0 / (i_b + ib1) + 1.0 / (i_a - ib1))
    ramps = c1 * hysteresis * (1.0 / (ib + ib1) + 1.0 / (ia - ib1))
    peak_lo = th_lo - ia * t_a1 / c1
    peak_hi = th_hi + ib * t_b2 / c1
    fields = (
        1.0 / period,
        period,
        high / period,
        peak_hi - peak_lo,
        0.5 * (peak_hi + peak_lo),
        vh,
        -vl,
        th_hi,
        th_lo,
        peak_hi,
        peak_lo,
        np.maximum(ia, ib) / c1,
        (period - ramps) * ia * ib / (ia + ib) ** 2,
        1.0 - ideal / period,
    )
    if np.ndim(period) == 0:
        return Prediction(*(float(x) for x in fields))
    shape = np.shape(period)
    return Prediction(*(np.broadcast_to(np.asarray(x, dtype=float), shape).copy() for x in fields))
