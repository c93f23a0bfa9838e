"""A set-duty board as the model sees it: its oscillator at a temperature, its point, and its
equivalent loop for the event-driven simulation."""

from __future__ import annotations

from tristock.circuits.clamped_schmitt.board import part_at, resistance_at
from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.duty_schmitt.physics import DutyPoint
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import BoardParts
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, value_at


def oscillator_of(design: BoardParts, rails: Rails, temp_c: float = 25.0) -> DutyOscillator:
    """The board at ``temp_c`` (°C): resistors and C1 moved by their tempcos, the diodes'
    forward drops by theirs (``circuits.diode.diode_at``)."""
    parts = design.parts()
    cap = part_at(parts, "C1", Capacitor)
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    return DutyOscillator(
        r1=resistance_at(parts, "R1", temp_c),
        r2=resistance_at(parts, "R2", temp_c),
        r3a=resistance_at(parts, "R3A", temp_c),
        r3b=resistance_at(parts, "R3B", temp_c),
        c1=value_at(cap.value_f, c_tc, temp_c),
        opamp=OpAmpModel.from_part(part_at(parts, "U1", OpAmp)),
        rails=rails,
        d3=part_at(parts, "D3", Diode),
        d4=part_at(parts, "D4", Diode),
        temp_c=temp_c,
    )


def board_point(design: BoardParts, rails: Rails, temp_c: float) -> DutyPoint:
    return oscillator_of(design, rails, temp_c).point()


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
