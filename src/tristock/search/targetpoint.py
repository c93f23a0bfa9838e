"""One op amp's loop linearised at the target: constants for the trimmed and tuned searches.

At the target frequency and amplitude the full model (``physics.predict``) reduces to

    T(P) = c·(P + d),   P = k·R3·C1,   c = (VH + VL)² / (VH·VL),   k = R1/R2
    A(k) = k·(VH + VL)·(1 + ε)

with d (s) the comparator's effective delay and ε the triangle's relative overshoot, both
taken where the full model meets the target exactly (``target_point``). These constants are
an approximation away from the target; the fixed-design search does not rely on them (it
evaluates every row with the full model inside windows from ``search.bounds``). The trimmed
and tuned searches still use them, and re-check every answer with the full model.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from tristock.circuits.board import rails_from_supply
from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.circuits.topology import Prediction
from tristock.spec.model import Spec
from tristock.stock.parts import OpAmp


@dataclass(frozen=True)
class TargetPoint:
    """The constants of one op amp at the target (see the module docstring).

    ``x`` = T_target/c - d is the P that meets the target; ``gain`` = X/(X + d) is ∂e_f/∂ln P
    there; ``rail_f``/``rail_a`` are the ln spreads (down, up) of f and A over the rail
    tolerance and the op-amp slew and delay spread; ``timing_share`` = c·d/T; ``peak_v`` the
    largest |triangle - reference| (V)."""

    c: float
    d: float
    x: float
    ln_k_target: float
    overshoot: float
    gain: float
    rail_f: tuple[float, float]
    rail_a: tuple[float, float]
    timing_share: float
    peak_v: float


def target_point(part: OpAmp, spec: Spec, vh: float, vl: float) -> tuple[TargetPoint | None, str]:
    """The constants where the full model meets the target, or None and the reason in words
    (the op amp cannot reach the target there: these reasons also explain an infeasible
    spec)."""
    model = OpAmpModel.from_part(part)
    c = (vh + vl) ** 2 / (vh * vl)
    t_target = 1.0 / spec.target.target_hz
    amp = spec.triangle.amplitude_vpp
    k = amp / (vh + vl)
    if k >= 0.95:
        return None, (
            f"{amp:g} Vpp needs k = R1/R2 = {k:.3f} with its {vh:.2f}/{vl:.2f} V swing; "
            "the thresholds would reach the square levels"
        )
    r3 = 10e3
    p = t_target / c
    # T(P) is c·(P + d) with d nearly constant, so a Newton step on P uses the slope c; A is
    # nearly proportional to k, so k takes a ratio step. A few steps reach 1e-13.
    for _ in range(200):
        pr = _predict_at(model, vh, vl, k, r3, p)
        period = float(pr.period_s)
        step_k = amp / float(pr.amplitude_vpp)
        p += (t_target - period) / c
        k *= step_k
        if not (math.isfinite(p) and p > 0 and 0 < k < 1):
            return None, "the model has no operating point at this frequency and amplitude"
        if abs(period / t_target - 1) < 1e-13 and abs(step_k - 1) < 1e-13:
            break
    pr = _predict_at(model, vh, vl, k, r3, p)
    d = t_target / c - p
    tau = (vh + vl) / part.slew_v_per_s
    if tau > 0.2 * t_target:
        return None, (
            f"its output transition {tau * 1e6:.3g} µs is {tau / t_target:.0%} of the period "
            "(model not trustworthy above 20 %)"
        )
    slope = max(vh, vl) * k / p
    if part.slew_v_per_s < slope:
        return None, (
            f"triangle slope {slope / 1e6:.3g} V/µs exceeds its slew rate "
            f"{part.slew_v_per_us:g} V/µs"
        )
    peak_hi, peak_lo = float(pr.peak_high_v), float(pr.peak_low_v)
    if peak_hi >= vh or -peak_lo >= vl:
        return None, (
            f"triangle peaks {peak_lo:+.2f}/{peak_hi:+.2f} V exceed its output swing "
            f"-{vl:.2f}/+{vh:.2f} V"
        )
    rail_f, rail_a = _rail_spread(part, spec, k, r3, p, pr)
    point = TargetPoint(
        c=c,
        d=d,
        x=p,
        ln_k_target=math.log(k),
        overshoot=float(pr.amplitude_vpp) / (k * (vh + vl)) - 1.0,
        gain=p / (p + d),
        rail_f=rail_f,
        rail_a=rail_a,
        timing_share=c * d / t_target,
        peak_v=max(abs(peak_hi), abs(peak_lo)),
    )
    return point, ""


def _predict_at(
    model: OpAmpModel,
    vh: float,
    vl: float,
    k: float,
    r3: float,
    p: float,
    slew_scale: float = 1.0,
    delay_scale: float = 1.0,
) -> Prediction:
    """The full model at k, R3 and P = k·R3·C1 (R2 = 100 kΩ; only k matters)."""
    return predict(
        k * 100e3,
        100e3,
        r3,
        p / (k * r3),
        vh,
        vl,
        slew_rise=model.slew_rise_v_per_s * slew_scale,
        slew_fall=model.slew_fall_v_per_s * slew_scale,
        delay=model.delay_s * delay_scale,
        gbw=model.gbw_hz,
        integrator_gbw=model.gbw_hz,
    )


def _rail_spread(
    part: OpAmp, spec: Spec, k: float, r3: float, p: float, nominal: Prediction
) -> tuple[tuple[float, float], tuple[float, float]]:
    """ln spreads (down, up) of f and A over rail tolerance and op-amp slew/delay spread."""
    t = spec.supply.tolerance_pct / 100
    model = OpAmpModel.from_part(part)
    f0 = float(nominal.frequency_hz)
    a0 = float(nominal.amplitude_vpp)
    lf, la = [0.0], [0.0]
    for scale in (1 - t, 1 + t):
        vh, vl = square_levels(rails_from_supply(spec.supply, scale), model)
        for s in (1 - SLEW_SPREAD, 1 + SLEW_SPREAD):
            for dl in (1 - DELAY_SPREAD, 1 + DELAY_SPREAD):
                pr = _predict_at(model, vh, vl, k, r3, p, s, dl)
                lf.append(math.log(float(pr.frequency_hz) / f0))
                la.append(math.log(float(pr.amplitude_vpp) / a0))
    return (-min(lf), max(lf)), (-min(la), max(la))
