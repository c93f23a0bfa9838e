"""A clamped board as the model sees it: its oscillator at a temperature, its point, and its
equivalent loop for the event-driven simulation."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import TypeVar

import numpy as np

from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import Clamp, ClampPoint, output_levels
from tristock.circuits.integrator import integrator_terms
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import BoardParts
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor, value_at

P = TypeVar("P")


def part_at(parts: Mapping[str, Part], designator: str, kind: type[P]) -> P:
    """The part at ``designator``, which must be a ``kind``."""
    part = parts[designator]
    if not isinstance(part, kind):
        raise TypeError(f"{designator}: expected a {kind.__name__}, got {type(part).__name__}")
    return part


def resistance_at(parts: Mapping[str, Part], designator: str, temp_c: float) -> float:
    r = part_at(parts, designator, Resistor)
    return value_at(r.value_ohm, r.tempco_ppm, temp_c)


def oscillator_of(design: BoardParts, rails: Rails, temp_c: float = 25.0) -> ClampedOscillator:
    """The board at ``temp_c`` (°C): resistors and C1 moved by their tempcos, the zeners by
    theirs (``circuits.diode.diode_at``)."""
    parts = design.parts()
    cap = part_at(parts, "C1", Capacitor)
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    return ClampedOscillator(
        r1=resistance_at(parts, "R1", temp_c),
        r2=resistance_at(parts, "R2", temp_c),
        r3=resistance_at(parts, "R3", temp_c),
        r5=resistance_at(parts, "R5", temp_c),
        c1=value_at(cap.value_f, c_tc, temp_c),
        opamp=OpAmpModel.from_part(part_at(parts, "U1", OpAmp)),
        rails=rails,
        d1=part_at(parts, "D1", Diode),
        d2=part_at(parts, "D2", Diode),
        temp_c=temp_c,
    )


def board_point(design: BoardParts, rails: Rails, temp_c: float) -> ClampPoint:
    return oscillator_of(design, rails, temp_c).point()


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
