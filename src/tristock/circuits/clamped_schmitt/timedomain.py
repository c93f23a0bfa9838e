"""A clamped board's equivalent loop for the event-driven simulation (the board itself is
built by ``ClampedOscillator.of``)."""

from __future__ import annotations

import math

import numpy as np

from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import Clamp, output_levels
from tristock.circuits.integrator import integrator_terms
from tristock.circuits.timeloop import Loop


def loop_from(osc: ClampedOscillator) -> Loop:
    """The equivalent op-amp loop for ``tristock.simulate``: square levels those of the clamp
    at the two thresholds (so the loop trips where the model does), R3 scaled so that the
    ramps take the model's time (the clamp's drive moves with the triangle by g·vt; the
    integrator's 1 + ε), and each edge a delayed linear slew with the model's effective
    delay. The simulation then checks the loop's timing, overshoot and duty around those
    edges; the clamp's statics are checked by ngspice. The integrator is ideal (GBW = inf)."""
    p = osc.prediction()
    point = osc.point()
    net = Clamp.of(point)
    vh, vl = output_levels(point, osc.rails.v_ref)
    ref = osc.rails.reference_v
    m = osc.opamp
    hi = float(net.level(vh, float(p.threshold_low_v), True)[0])
    lo = float(net.level(-vl, float(p.threshold_high_v), False)[0])
    ve = m.offset_v + m.bias_a * osc.r3
    rc = osc.r3 * osc.c1
    slow = float(integrator_terms(np.asarray(rc), np.asarray(m.gbw_hz)).slow)
    hysteresis = float(p.threshold_high_v) - float(p.threshold_low_v)
    loop_ideal = rc * hysteresis * (1.0 / (hi - ve) + 1.0 / (ve - lo))
    model_ideal = float(p.period_s) * (1.0 - float(p.timing_share))
    r3 = osc.r3 * slow * model_ideal / loop_ideal
    span = hi - lo
    rate = osc.r5 / (1.0 / (1.0 / osc.r5 + 1.0 / osc.r3 + 1.0 / (osc.r1 + osc.r2)))
    fastest = max(m.slew_rise_v_per_s, m.slew_fall_v_per_s) / rate
    delay = max(float(p.effective_delay_s) - span / (2.0 * fastest), 0.0)
    edge = max(float(p.effective_delay_s) - delay, 1e-15)
    slew = span / (2.0 * edge) if math.isfinite(fastest) else math.inf
    return Loop(
        r1=osc.r1,
        r2=osc.r2,
        r3=r3,
        c1=osc.c1,
        v_ref=ref,
        v_high=ref + hi,
        v_low=ref + lo,
        slew_rise=slew,
        slew_fall=slew,
        delay=delay,
        vos1=m.offset_v,
        ib1=m.bias_a * osc.r3 / r3,
        vos2=m.comparator_offset_v,
        ib2=m.comparator_bias_a,
    )
