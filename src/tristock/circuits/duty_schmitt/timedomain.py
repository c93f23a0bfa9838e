"""A set-duty board's equivalent loop for the event-driven simulation (the board itself is
built by ``DutyOscillator.of``)."""

from __future__ import annotations

from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.rails import square_levels
from tristock.circuits.timeloop import Loop


def loop_from(osc: DutyOscillator) -> Loop:
    """The equivalent op-amp loop for ``tristock.simulate``: the same op amp, square levels
    and threshold divider, with one integrator resistor R3' and offset Vos1' chosen so that
    the ramps have the model's two slopes, (I_A - Ib1)/C1 down and (I_B + Ib1)/C1 up:
    R3' = (VH + VL)/(C1·(s_A + s_B)), Vos1' = VH - s_A·R3'·C1 (no Ib1). Its edges switch the
    whole current at once where the real branches switch in turn through their diodes, so the
    simulation checks the loop's timing around the edges to about the edges' share of the
    period; the steering itself is checked by ngspice."""
    m = osc.opamp
    ref = osc.rails.reference_v
    vh, vl = square_levels(osc.rails, m)
    i_a, i_b = osc.branch_currents()
    s_a = (i_a - m.bias_a) / osc.c1
    s_b = (i_b + m.bias_a) / osc.c1
    r3 = (vh + vl) / (osc.c1 * (s_a + s_b))
    return Loop(
        r1=osc.r1,
        r2=osc.r2,
        r3=r3,
        c1=osc.c1,
        v_ref=ref,
        v_high=ref + vh,
        v_low=ref - vl,
        slew_rise=m.slew_rise_v_per_s,
        slew_fall=m.slew_fall_v_per_s,
        delay=m.delay_s,
        vos1=vh - s_a * r3 * osc.c1,
        ib1=0.0,
        vos2=m.comparator_offset_v,
        ib2=m.comparator_bias_a,
        gbw_hz=m.gbw_hz,
    )
