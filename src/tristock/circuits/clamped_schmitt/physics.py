"""The zener-clamped loop's model, vectorised: the op amp U1B drives the square node S through
R5; D1/D2 (back to back) clamp S to the reference; S drives the integrator (R3, C1) and the
threshold divider (R2 to the + input, R1 to the triangle). Volts from the reference; SI units.

Notation: VH, VL the op amp's output levels (rails less headroom); Rl = R1 + R2; the
integrator's - pin sits at Vos1 (its drive error Ve = Vos1 + Ib1·R3); the network seen by the
zener pair is a Thevenin source E(Vo, vt) = Rth·(Vo/R5 + Vos1/R3 + vt/Rl) behind
Rth = R5 ∥ R3 ∥ Rl; the pair conducting I in one direction drops V(I) = v0 + m·ln I + r·I
(``circuits.diode``: one zener in breakdown, the other forward).

- Levels: high S = E(VH, vt) - Rth·I with V_up(I) = S (current from E through the pair), low
  S = E(-VL, vt) + Rth·I with V_dn(I) = -S: ±(Vz + Vf) plus the zener's and the forward
  junction's rise with I. Each is linearised in vt about vt = 0: S(vt) = S0 + g·vt with
  g = (Rth/Rl)·rd/(rd + Rth), rd = dV/dI (the load through R1 + R2 moves the clamp current
  as the triangle ramps); the curvature left out is about 2e-4 V at the thresholds of the
  demo board (4e-5 of the level).
- Thresholds: the comparator flips when R2·vt + R1·S(vt) = Rl·s2, s2 = Vos2 + Ib2·(R1 ∥ R2):
  vt = (Rl·s2 - R1·S0)/(R2 + R1·g), at the bottom with the high level, at the top with the low.
- Ramps: dvt/dt = -(S(vt) - Ve)/RC' (RC' = R3·C1·(1 + ε), ``integrator``): between v1 and v2
  the time is RC'·(v2 - v1)/D(v1)·φ(g·(v2 - v1)/D(v1)), φ(x) = -ln(1 - x)/x, D the drive.
- Edges: the comparator is a transport delay td and a linear slew SR of its output Vo (its
  GBW build-up is not modelled: ``checks`` flags boards where it matters). S follows Vo through
  the static map Vo(S) = κ·S - R5·(Vos1/R3 + vt/Rl) + R5·I_pair(S), κ = R5/Rth, so the time at
  which S passes level s is t(s) = td + |Vo(s) - Vo_start|/SR. The edge acts on the
  integrator as an instant step at its centroid c = mean over s of t(s) (a linear slew
  integrates to the same charge), lagged by the integrator's τi; the square's mid-level
  crossing is t(S_mid); the triangle overshoots its threshold by (∫ t(s) ds over the levels
  between Ve and the start + drive·τi - A)/RC' (A the lag area, ``lag_overshoot_area``, with
  S's slew R5-divided: SR·Rth/R5). ∫ I_pair ds is exact in closed form:
  ∫_0^V I dV = I·(m + r·I/2) at V = V(I).
- Period T = d_f + t_up + d_r + t_down (d = c + τi; t_up from the bottom turn to the top
  threshold, t_down from the top turn to the bottom threshold); high time T + m_f - t_top - m_r.

Within this model the period is exact but for the triangle's slope and the clamp's load being
held at their threshold values through each edge (as in ``opamp_schmitt``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tristock.circuits.diode import Chain, zener_chain
from tristock.circuits.integrator import integrator_terms, lag_overshoot_area
from tristock.circuits.topology import FloatArray, Prediction, Value


@dataclass(frozen=True)
class ClampPoint:
    """Every input of ``predict``, floats or broadcastable arrays (Ω, F, V, V/s, s, Hz, A):
    the op amp's rails, headroom, slew, delay, GBW (the integrator's), offsets and bias;
    D1 and D2 as vz (at izt), rz, izt, vf (at 1 mA); ``vt_therm`` the thermal voltage."""

    r1: Value
    r2: Value
    r3: Value
    r5: Value
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
    vz1: Value
    rz1: Value
    izt1: Value
    vf1: Value
    vz2: Value
    rz2: Value
    izt2: Value
    vf2: Value
    vt_therm: Value


def output_levels(p: ClampPoint, v_ref: float | None) -> tuple[FloatArray, FloatArray]:
    """(VH, VL) of the op amp from the reference (V): rails less headroom; the reference is
    ``v_ref``, else 0 V for split rails and mid-rail for a single supply."""
    v_pos = np.asarray(p.v_pos, dtype=float)
    v_neg = np.asarray(p.v_neg, dtype=float)
    ref = v_ref if v_ref is not None else np.where(v_neg < 0.0, 0.0, (v_pos + v_neg) / 2.0)
    return v_pos - p.swing_pos - ref, ref - (v_neg + p.swing_neg)


@dataclass(frozen=True)
class Clamp:
    """The clamp network of one point: the pair in each direction and the Thevenin terms."""

    up: Chain
    down: Chain
    rth: FloatArray
    r5: FloatArray
    r3: FloatArray
    rl: FloatArray
    vi: FloatArray

    @classmethod
    def of(cls, p: ClampPoint) -> Clamp:
        d1 = (p.vz1, p.rz1, p.izt1, p.vf1)
        d2 = (p.vz2, p.rz2, p.izt2, p.vf2)
        up, down = zener_chain(d1, d2, p.vt_therm), zener_chain(d2, d1, p.vt_therm)
        r5, r3 = np.asarray(p.r5, dtype=float), np.asarray(p.r3, dtype=float)
        rl = np.asarray(p.r1, dtype=float) + np.asarray(p.r2, dtype=float)
        rth = 1.0 / (1.0 / r5 + 1.0 / r3 + 1.0 / rl)
        return cls(up, down, rth, r5, r3, rl, np.asarray(p.vos1, dtype=float))

    def source(self, vo: Value, vt: Value) -> FloatArray:
        """E(Vo, vt) = Rth·(Vo/R5 + Vos1/R3 + vt/Rl) (V)."""
        return np.asarray(self.rth * (vo / self.r5 + self.vi / self.r3 + vt / self.rl))

    def level(self, vo: Value, vt: Value, high: bool) -> tuple[FloatArray, FloatArray]:
        """(S, I): the square node and the pair's current with the op amp at ``vo``."""
        e = self.source(vo, vt)
        if high:
            i = self.up.current(e, self.rth)
            return np.asarray(e - self.rth * i), i
        i = self.down.current(-e, self.rth)
        return np.asarray(e + self.rth * i), i

    def slope(self, current: FloatArray, high: bool) -> FloatArray:
        """g = dS/dvt = (Rth/Rl)·rd/(rd + Rth) at the pair's current."""
        rd = (self.up if high else self.down).resistance(current)
        return np.asarray(self.rth / self.rl * rd / (rd + self.rth))

    def pair_area(self, s: FloatArray) -> FloatArray:
        """P(s) = |∫_0^s I_pair ds'| (V·A): I·(|s|) - ∫_0^I V dI' on the conducting side."""
        up_i = self.up.current(np.maximum(s, 0.0), 0.0)
        dn_i = self.down.current(np.maximum(-s, 0.0), 0.0)
        up_p = up_i * np.maximum(s, 0.0) - self.up.integral(up_i)
        dn_p = dn_i * np.maximum(-s, 0.0) - self.down.integral(dn_i)
        return np.asarray(np.where(s >= 0.0, up_p, dn_p))

    def pair_current(self, s: FloatArray) -> FloatArray:
        """I_pair(s), signed (A)."""
        up_i = self.up.current(np.maximum(s, 0.0), 0.0)
        dn_i = self.down.current(np.maximum(-s, 0.0), 0.0)
        return np.asarray(np.where(s >= 0.0, up_i, -dn_i))

    def drive_of(self, s: FloatArray, vt: FloatArray) -> FloatArray:
        """Vo(s): the op-amp output that holds S at ``s`` (V)."""
        kappa = self.r5 / self.rth
        return np.asarray(
            kappa * s
            - self.r5 * (self.vi / self.r3 + vt / self.rl)
            + self.r5 * self.pair_current(s)
        )

    def drive_integral(self, s_a: FloatArray, s_b: FloatArray, vt: FloatArray) -> FloatArray:
        """∫_{s_a}^{s_b} Vo(s) ds (V²), exact: the linear part and R5·(P(s_b) ∓ P(s_a))."""
        kappa = self.r5 / self.rth
        linear = 0.5 * kappa * (s_b**2 - s_a**2) - self.r5 * (self.vi / self.r3 + vt / self.rl) * (
            s_b - s_a
        )
        pa, pb = self.pair_area(s_a), self.pair_area(s_b)
        signed_a = np.where(s_a >= 0.0, pa, -pa)
        signed_b = np.where(s_b >= 0.0, pb, -pb)
        return np.asarray(linear + self.r5 * (signed_b - signed_a))


def ramp_time(span: FloatArray, drive: FloatArray, g: FloatArray) -> FloatArray:
    """∫ dv/D(v) over ``span`` volts starting where the drive is ``drive`` and shrinking at
    g per volt: (span/drive)·φ(g·span/drive), φ(x) = -ln(1 - x)/x (s per RC')."""
    x = g * span / drive
    small = np.abs(x) < 1e-9
    phi = np.where(
        small, 1.0 + 0.5 * x, -np.log1p(-np.where(small, 0.5, x)) / np.where(small, 1, x)
    )
    return np.asarray(span / drive * phi)


def predict_point(p: ClampPoint, v_ref: float | None, control: str = "series") -> Prediction:
    """The clamped loop's prediction at ``p`` (see the module notes); ``control`` is unused
    (no pot in this topology)."""
    del control
    vh, vl = output_levels(p, v_ref)
    net = Clamp.of(p)
    r1, r2 = np.asarray(p.r1, dtype=float), np.asarray(p.r2, dtype=float)
    rc = np.asarray(p.r3, dtype=float) * np.asarray(p.c1, dtype=float)
    slow, lag = integrator_terms(rc, np.asarray(p.gbw, dtype=float))
    rc_eff = rc * slow
    ve = net.vi + np.asarray(p.ib1, dtype=float) * net.r3
    s2 = p.vos2 + np.asarray(p.ib2, dtype=float) * r1 * r2 / net.rl

    s_h0, i_h0 = net.level(vh, 0.0, True)
    s_l0, i_l0 = net.level(-vl, 0.0, False)
    g_h, g_l = net.slope(i_h0, True), net.slope(i_l0, False)
    vt_b = (net.rl * s2 - r1 * s_h0) / (r2 + r1 * g_h)
    vt_t = (net.rl * s2 - r1 * s_l0) / (r2 + r1 * g_l)
    vt_mid = 0.5 * (vt_b + vt_t)
    s_mid = 0.5 * (s_h0 + s_l0) + 0.5 * (g_h + g_l) * vt_mid

    def drive_down(vt: FloatArray) -> FloatArray:
        return np.asarray(s_h0 + g_h * vt - ve)

    def drive_up(vt: FloatArray) -> FloatArray:
        return np.asarray(ve - s_l0 - g_l * vt)

    td = np.asarray(p.delay, dtype=float)
    sr_f, sr_r = np.asarray(p.slew_fall, dtype=float), np.asarray(p.slew_rise, dtype=float)
    alpha = net.rth / net.r5
    # falling edge at the bottom threshold: Vo from VH down at SR_fall
    hi_b, _ = net.level(vh, vt_b, True)
    lo_b, _ = net.level(-vl, vt_b, False)
    mean_b = net.drive_integral(lo_b, hi_b, vt_b) / (hi_b - lo_b)
    c_f = td + (vh - mean_b) / sr_f
    m_f = td + (vh - net.drive_of(s_mid, vt_b)) / sr_f
    o_f = (hi_b - ve) * (td + vh / sr_f) - net.drive_integral(
        np.broadcast_arrays(ve, vt_b)[0], hi_b, vt_b
    ) / sr_f
    a_f = lag_overshoot_area(hi_b - ve, ve - lo_b, alpha * sr_f, lag)
    # rising edge at the top threshold: Vo from -VL up at SR_rise
    hi_t, _ = net.level(vh, vt_t, True)
    lo_t, _ = net.level(-vl, vt_t, False)
    mean_t = net.drive_integral(lo_t, hi_t, vt_t) / (hi_t - lo_t)
    c_r = td + (mean_t + vl) / sr_r
    m_r = td + (net.drive_of(s_mid, vt_t) + vl) / sr_r
    o_r = (ve - lo_t) * (td + vl / sr_r) + net.drive_integral(
        lo_t, np.broadcast_arrays(ve, vt_t)[0], vt_t
    ) / sr_r
    a_r = lag_overshoot_area(ve - lo_t, hi_t - ve, alpha * sr_r, lag)

    d_f, d_r = c_f + lag, c_r + lag
    turn_b = vt_b - drive_down(vt_b) * d_f / rc_eff
    turn_t = vt_t + drive_up(vt_t) * d_r / rc_eff
    t_up = rc_eff * ramp_time(vt_t - turn_b, drive_up(turn_b), g_l)
    t_down = rc_eff * ramp_time(turn_t - vt_b, drive_down(turn_t), g_h)
    t_top = d_f + t_up
    period = t_top + d_r + t_down
    high = period + m_f - t_top - m_r
    ideal = rc * (
        ramp_time(vt_t - vt_b, drive_up(vt_b), g_l) + ramp_time(vt_t - vt_b, drive_down(vt_t), g_h)
    )
    peak_lo = vt_b - (o_f + (hi_b - ve) * lag - a_f) / rc_eff
    peak_hi = vt_t + (o_r + (ve - lo_t) * lag - a_r) / rc_eff
    a, b = drive_down(vt_b), drive_up(vt_t)
    fields = (
        1.0 / period,
        period,
        high / period,
        peak_hi - peak_lo,
        0.5 * (peak_hi + peak_lo),
        s_h0 + g_h * vt_mid,
        s_l0 + g_l * vt_mid,
        vt_t,
        vt_b,
        peak_hi,
        peak_lo,
        np.maximum(a, b) / rc_eff,
        (d_r * b + d_f * a) / (a + b),
        1.0 - ideal / period,
    )
    if np.ndim(period) == 0:
        return Prediction(*(float(x) for x in fields))
    shape = np.shape(period)
    return Prediction(*(np.broadcast_to(np.asarray(x, dtype=float), shape).copy() for x in fields))
