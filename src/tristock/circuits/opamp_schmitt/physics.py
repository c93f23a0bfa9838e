"""The oscillator's physics: an integrator driving a non-inverting Schmitt trigger, non-ideal.

Topology and designators (DESIGN.md): the square node drives the integrator through R3 into
C1; the triangle node feeds the comparator's + input through R1, the square feeds it back
through R2; the comparator's - input and the integrator's + input sit at the reference node.
All voltages here are measured from that reference (ground for split rails, a mid-rail
reference for a single supply). Units are SI base units throughout: ohm, farad, volt,
ampere, second, hertz, V/s.

Notation: k = R1/R2, β = R1/(R1 + R2), the square saturates at +VH and -VL,
τ = (VH + VL)/SR is one comparator transition, Ve = Vos1 + Ib1·R3 the integrator's error
voltage, a = VH - Ve and b = VL + Ve the drives that set the falling and rising triangle
slopes a/(R3·C1) and b/(R3·C1).

The model in one paragraph: the triangle turns at the thresholds -VH·k and +VL·k (both moved
by the comparator offset); every comparator edge acts on the integrator exactly like an
instant switch at the edge's centroid, td + τ/2 after the threshold crossing for a linear slew
(a linear slew integrates to the same charge as a step at its midpoint), later when the
comparator's finite gain-bandwidth must first build the edge up through R1/R2 (a delay
differential equation, tabulated in ``transition``); a single-pole integrator slows every ramp
by 1 + ε and follows each edge a lag τi later (``integrator``); the triangle overshoots
each threshold until the (lagged) square crosses the integrator's neutral level. Both op-amp
channels are single-pole amplifiers with a tanh input stage that slew-limits at SR; the
comparator's delay is a transport delay ahead of its stage. Within that model the period and
duty are exact but for the triangle's slope being held constant through each edge (its error
grows with the share of the period the edges take: 4e-4 at 22 %), and every result is checked
against ngspice macromodels of the same circuit (tests/circuits/test_circuit_ngspice.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from tristock.circuits.looptiming import loop_timing
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.circuits.topology import ArrayLike, FloatArray, Prediction
from tristock.circuits.transition import switch_times
from tristock.stock.units import format_value

inf = math.inf


def _checked(name: str, x: FloatArray, *, low: float, allow_equal: bool, allow_inf: bool) -> None:
    if x.size:  # the common case from the extremes alone (NaN makes both NaN, and fail)
        least, most = x.min(), x.max()
        if (least >= low if allow_equal else least > low) and (allow_inf or most < inf):
            return
    ok = x >= low if allow_equal else x > low
    if not allow_inf:
        ok &= np.isfinite(x)
    if not np.all(ok):
        bad = x[~ok].flat[0] if x.ndim else x
        rel = ">=" if allow_equal else ">"
        fin = "" if allow_inf else " and finite"
        raise ValueError(f"{name}: every value must be {rel} {low:g}{fin}, got {float(bad)!r}")


def gbw_effective_delay(
    r1: ArrayLike,
    r2: ArrayLike,
    r3: ArrayLike,
    c1: ArrayLike,
    drive_v: ArrayLike,
    span_v: ArrayLike,
    slew: ArrayLike,
    gbw: ArrayLike,
    delay: ArrayLike = 0.0,
) -> FloatArray:
    """The share (s) of one comparator edge's switching delay that its finite gain-bandwidth
    ``gbw`` (Hz) adds: centroid(GBW) - centroid(GBW = inf) = G(W)/λ - span/(2·SR), with the
    edge's centroid from ``transition.switch_times`` (the triangle's slope drive_v/(R3·C1),
    span = VH + VL, SR the edge's slew rate, td the transport delay, which lengthens the
    build-up when GBW is finite). 0 when GBW = inf; a finite GBW needs a finite SR."""
    r1a, r2a, r3a, c1a, va, spa, sra, ga, tda = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (r1, r2, r3, c1, drive_v, span_v, slew, gbw, delay))
    )
    k = r1a / r2a
    times = switch_times(k, va / (r3a * c1a), spa, va, sra, ga, tda)
    with np.errstate(invalid="ignore"):
        extra = times.centroid - (tda + 0.5 * spa / sra)
    return np.asarray(np.where(np.isinf(ga), 0.0, extra), dtype=float)


def predict(
    r1: ArrayLike,
    r2: ArrayLike,
    r3: ArrayLike,
    c1: ArrayLike,
    vh: ArrayLike,
    vl: ArrayLike,
    *,
    slew_rise: ArrayLike = inf,
    slew_fall: ArrayLike = inf,
    delay: ArrayLike = 0.0,
    gbw: ArrayLike = inf,
    vos1: ArrayLike = 0.0,
    ib1: ArrayLike = 0.0,
    vos2: ArrayLike = 0.0,
    ib2: ArrayLike = 0.0,
    integrator_gbw: ArrayLike = inf,
) -> Prediction:
    """Closed-form oscillator model, vectorised (numpy broadcasting over every argument).

    Units: ohm, farad, volt (from the reference), V/s, s, Hz, A. Scalars in, floats out.
    ``gbw`` is the comparator's gain-bandwidth, ``integrator_gbw`` the integrator's (an
    ``Oscillator`` passes its part's GBW to both).

    With k = R1/R2, Ve = Vos1 + Ib1·R3, a = VH - Ve, b = VL + Ve, the integrator's terms
    (``integrator.integrator_terms``) RC' = R3·C1·(1 + ε) and lag τi, and each comparator
    edge's times from its threshold crossing (``transition.switch_times``): centroid c,
    mid-swing crossing m and overshoot time o (rising edge at the top turn: triangle slope
    b/RC', drive b; falling edge at the bottom: slope a/RC', drive a); d = c + τi is the
    edge's effective delay:

    - high time  t_H = (k·(VH + VL)·RC' + b·d_r)/a + d_r + m_f - m_r
    - low time   t_L = (k·(VH + VL)·RC' + a·d_f)/b + d_f + m_r - m_f
    - period T = t_H + t_L = (VH + VL)·[k·(VH + VL)·RC'/(a·b) + d_r/a + d_f/b]
      (ideal: T0 = R3·C1·k·(VH + VL)²/(VH·VL); linear slew, no GBW: symmetric T0 + 4·td + 2·τ)
    - duty_high = t_H/T (at mid-swing); VL/(VH + VL) when Ve = 0 and the edges are alike
    - thresholds +VL·k + s and -VH·k + s with s = (1 + k)·(Vos2 + Ib2·(R1 ∥ R2)); Ib2 flows
      into the + pin, pulling it Ib2·(R1 ∥ R2) below the divider voltage, so it adds to Vos2
      (the comparator's - input sits at ref + Vos2); period and duty are unchanged
    - peaks: top threshold + (b/RC')·(o_r + τi) - A_r/RC', bottom threshold - (a/RC')·(o_f + τi)
      + A_f/RC' (the triangle ramps on until the lagged square crosses Ve; A from
      ``lag_overshoot_area``)
    - timing_share = 1 - T_ideal/T, T_ideal = (VH + VL)²·k·R3·C1/(a·b): the same loop (levels,
      offsets, bias) with instant switching and an ideal integrator

    Within the model (transport delay td, a single-pole comparator with a tanh input stage and
    slew SR, hard output clamps, a linear single-pole integrator) the period is exact but for
    two stated approximations: the triangle's slope is held constant through each edge (error
    about 4e-4 in frequency when the edges take 20 % of the period, 1.3e-3 at 40 %) and the
    edge times come from an interpolated table (see ``transition``). Where it stops being
    accurate: an edge must finish before the triangle reaches the next threshold (τ ≪ T/2);
    the integrator must neither slew-limit nor clip (its slope well below its slew rate: its
    tanh stage is taken as linear, an error of about ε·(slope/SR)²/3); a real part's delay is
    not constant, use the catalogued comparator-mode delay (what ``delay`` means: DESIGN.md).
    """
    given = [
        np.asarray(x, dtype=float)
        for x in (
            r1,
            r2,
            r3,
            c1,
            vh,
            vl,
            slew_rise,
            slew_fall,
            delay,
            gbw,
            vos1,
            ib1,
            vos2,
            ib2,
            integrator_gbw,
        )
    ]
    R1, R2, R3, C1, VH, VL, SRr, SRf, TD, GBW, VOS1, IB1, VOS2, IB2, IGBW = np.broadcast_arrays(
        *given
    )
    scalar = R1.ndim == 0
    # the checks read the arguments as given: a value broadcast to many rows is read once
    r1, r2, r3, c1, vh, vl, slew_rise, slew_fall, delay, gbw, vos1, ib1, vos2, ib2, igbw = given
    for name, x in (("r1", r1), ("r2", r2), ("r3", r3), ("c1", c1), ("vh", vh), ("vl", vl)):
        _checked(name, x, low=0.0, allow_equal=False, allow_inf=False)
    for name, x in (
        ("slew_rise", slew_rise),
        ("slew_fall", slew_fall),
        ("gbw", gbw),
        ("integrator_gbw", igbw),
    ):
        _checked(name, x, low=0.0, allow_equal=False, allow_inf=True)
    _checked("delay", delay, low=0.0, allow_equal=True, allow_inf=False)
    for name, x in (("vos1", vos1), ("ib1", ib1), ("vos2", vos2), ("ib2", ib2)):
        _checked(name, np.abs(x), low=0.0, allow_equal=True, allow_inf=False)

    k = R1 / R2
    rc = R3 * C1
    span = VH + VL
    ve = VOS1 + IB1 * R3
    a = VH - ve
    b = VL + ve
    if not (np.all(a > 0.0) and np.all(b > 0.0)):
        raise ValueError(
            "vos1: the integrator error voltage Ve = vos1 + ib1·r3 reaches a square level "
            "(need -VL < Ve < VH): the triangle would never turn"
        )

    core = loop_timing(
        k,
        rc,
        span,
        a,
        b,
        slew_rise=SRr,
        slew_fall=SRf,
        delay=TD,
        gbw=GBW,
        integrator_gbw=IGBW,
    )
    period, t_high, ideal_period = core.period_s, core.high_s, core.ideal_period_s
    d_r, d_f, rc_eff = core.delay_rise_s, core.delay_fall_s, core.rc_eff_s

    shift = (1.0 + k) * (VOS2 + IB2 * R1 * R2 / (R1 + R2))
    th_hi = VL * k + shift
    th_lo = -VH * k + shift
    peak_hi = th_hi + core.overshoot_top_v
    peak_lo = th_lo - core.overshoot_bottom_v

    fields = (
        1.0 / period,
        period,
        t_high / period,
        peak_hi - peak_lo,
        (peak_hi + peak_lo) / 2.0,
        VH,
        -VL,
        th_hi,
        th_lo,
        peak_hi,
        peak_lo,
        np.maximum(a, b) / rc_eff,
        (d_r * b + d_f * a) / (a + b),
        1.0 - ideal_period / period,
    )
    if scalar:
        return Prediction(*(float(x) for x in fields))
    return Prediction(*(np.asarray(x, dtype=float) for x in fields))


def _fmt(value: float, unit: str) -> str:
    return format_value(value, unit, digits=3)


def _signed(value: float, unit: str) -> str:
    text = _fmt(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


@dataclass(frozen=True)
class Oscillator:
    """One built oscillator: R1, R2, R3 (ohm) and C1 (F) already at temperature, the op amp
    (both channels alike) and the rails. ``prediction()`` runs ``predict`` with the square
    levels from ``square_levels`` and every non-ideality of ``opamp``."""

    r1: float
    r2: float
    r3: float
    c1: float
    opamp: OpAmpModel
    rails: Rails

    def __post_init__(self) -> None:
        for name, unit in (("r1", "ohm"), ("r2", "ohm"), ("r3", "ohm"), ("c1", "F")):
            v = getattr(self, name)
            try:
                ok = math.isfinite(float(v)) and float(v) > 0.0
            except (TypeError, ValueError):
                ok = False
            if not ok:
                raise ValueError(f"{name}: must be a positive finite value in {unit}, got {v!r}")
        square_levels(self.rails, self.opamp)  # fails early, naming the headroom at fault

    def prediction(self) -> Prediction:
        """The full non-ideal prediction (see ``predict``); computed once."""
        return self._prediction

    @cached_property
    def _prediction(self) -> Prediction:
        vh, vl = square_levels(self.rails, self.opamp)
        m = self.opamp
        return predict(
            self.r1,
            self.r2,
            self.r3,
            self.c1,
            vh,
            vl,
            slew_rise=m.slew_rise_v_per_s,
            slew_fall=m.slew_fall_v_per_s,
            delay=m.delay_s,
            gbw=m.gbw_hz,
            vos1=m.offset_v,
            ib1=m.bias_a,
            vos2=m.comparator_offset_v,
            ib2=m.comparator_bias_a,
            integrator_gbw=m.gbw_hz,
        )

    def _get(self, name: str) -> float:
        return float(getattr(self.prediction(), name))

    @property
    def k(self) -> float:
        """k = R1/R2 (dimensionless)."""
        return self.r1 / self.r2

    @property
    def frequency_hz(self) -> float:
        return self._get("frequency_hz")

    @property
    def period_s(self) -> float:
        return self._get("period_s")

    @property
    def duty_high(self) -> float:
        return self._get("duty_high")

    @property
    def amplitude_vpp(self) -> float:
        return self._get("amplitude_vpp")

    @property
    def offset_v(self) -> float:
        return self._get("offset_v")

    @property
    def square_high_v(self) -> float:
        return self._get("square_high_v")

    @property
    def square_low_v(self) -> float:
        return self._get("square_low_v")

    @cached_property
    def ideal_frequency_hz(self) -> float:
        """1/T0, T0 = R3·C1·k·(VH + VL)²/(VH·VL): ideal switching, same VH and VL (Hz)."""
        vh, vl = square_levels(self.rails, self.opamp)
        return vh * vl / (self.r3 * self.c1 * self.k * (vh + vl) ** 2)

    def __repr__(self) -> str:
        return (
            f"Oscillator(R1={_fmt(self.r1, 'Ω')}, R2={_fmt(self.r2, 'Ω')}, "
            f"R3={_fmt(self.r3, 'Ω')}, C1={_fmt(self.c1, 'F')}, f={_fmt(self.frequency_hz, 'Hz')})"
        )

    def __str__(self) -> str:
        p = self.prediction()
        r = self.rails
        lines = [
            "triangle/square oscillator",
            f"  R1 {_fmt(self.r1, 'Ω')}   R2 {_fmt(self.r2, 'Ω')}   R3 {_fmt(self.r3, 'Ω')}   "
            f"C1 {_fmt(self.c1, 'F')}   k = R1/R2 = {self.k:.4g}",
            f"  rails {_signed(r.v_pos, 'V')} / {_signed(r.v_neg, 'V')}, reference "
            f"{_fmt(r.reference_v, 'V')}; square {_signed(float(p.square_high_v), 'V')} / "
            f"{_signed(float(p.square_low_v), 'V')} from the reference",
            f"  frequency {_fmt(float(p.frequency_hz), 'Hz')} (ideal switch "
            f"{_fmt(self.ideal_frequency_hz, 'Hz')}), period {_fmt(float(p.period_s), 's')}, "
            f"high {100.0 * float(p.duty_high):.2f} %",
            f"  triangle {_fmt(float(p.amplitude_vpp), 'V')} p-p, midpoint "
            f"{_signed(float(p.offset_v), 'V')}; peaks {_signed(float(p.peak_high_v), 'V')} / "
            f"{_signed(float(p.peak_low_v), 'V')}, thresholds "
            f"{_signed(float(p.threshold_high_v), 'V')} / {_signed(float(p.threshold_low_v), 'V')}",
            f"  slope {float(p.slope_v_per_s) * 1e-6:.3g} V/µs, effective switching delay "
            f"{_fmt(float(p.effective_delay_s), 's')}, op-amp timing "
            f"{100.0 * float(p.timing_share):.1f} % of the period",
        ]
        return "\n".join(lines)
