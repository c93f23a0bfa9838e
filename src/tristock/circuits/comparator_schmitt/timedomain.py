"""The comparator-IC loop for the event-driven simulation (``tristock.simulate``).

The simulation's exact piecewise engine takes a loop whose square has two fixed levels, a
transport delay and linear edges, and an ideal integrator (``opamp_schmitt.timedomain.Loop``).
So the loop handed to it is: U2's levels (VOL above V-, and V+ - headroom, or for an
open-drain output its high level with the triangle at mid-way, ``physics.predict``), each
edge starting delay - τ/2 after the crossing and slewing the whole step in τ = 10-90 % time
/ 0.8, U1's offset and bias, U2's offset and bias, and an ideal integrator. Two things of the
model are not in it: U1's finite gain-bandwidth (ε and the lag τi of ``integrator``) and the
open-drain level's dependence on the triangle; ``COMPARATOR_SCHMITT.accuracy`` states what
that costs on the demo board, and the ngspice tests (tests/circuits/test_comparator_ngspice.py)
check the full model, those terms included.
"""

from __future__ import annotations

import math

from tristock.circuits.comparator_schmitt.point import ComparatorOscillator
from tristock.circuits.timeloop import Loop
from tristock.stock.comparators import EDGE_SHARE, edge_start_s


def loop_of(osc: ComparatorOscillator) -> Loop:
    """The piecewise engine's loop for ``osc`` (module docstring); voltages to ground."""
    p = osc.prediction()
    u2, m, rails = osc.comparator, osc.opamp, osc.rails
    ref = rails.reference_v
    v_high = ref + float(p.square_high_v)
    v_low = ref + float(p.square_low_v)
    span = v_high - v_low
    rise, fall = u2.rise_s / EDGE_SHARE, u2.fall_s / EDGE_SHARE
    start_r, start_f = edge_start_s(u2.delay_s, u2.rise_s), edge_start_s(u2.delay_s, u2.fall_s)
    if not math.isclose(start_r, start_f, rel_tol=1e-12, abs_tol=1e-15):
        raise ValueError(
            f"U2 {u2.id}: rise_s and fall_s differ, so its edges start at different times; the "
            "piecewise engine has one transport delay (use the ngspice netlist)"
        )
    return Loop(
        r1=osc.r1,
        r2=osc.r2,
        r3=osc.r3,
        c1=osc.c1,
        v_ref=ref,
        v_high=v_high,
        v_low=v_low,
        slew_rise=span / rise,
        slew_fall=span / fall,
        delay=start_r,
        vos1=m.offset_v,
        ib1=m.bias_a,
        vos2=u2.offset_v,
        ib2=u2.bias_a,
        gbw_hz=math.inf,
    )
