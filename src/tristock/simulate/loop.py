"""The simulation's settings and the messages that say why a loop does not oscillate; the
loop's parameters come from the topology (``Topology.time_domain``)."""

from __future__ import annotations

import math

from tristock.circuits.timeloop import Loop
from tristock.stock.units import format_value

#: Successive periods must agree to this relative difference before measuring.
SETTLE_TOLERANCE = 1e-9
#: Periods allowed beyond ``settle_periods`` for the loop to settle before giving up.
MAX_EXTRA_SETTLE_PERIODS = 100
#: Event budget per simulated period (a healthy loop needs about ten).
EVENTS_PER_PERIOD = 200
#: Transitions that may turn back before mid-swing in a row before the loop is declared broken.
MAX_UNFINISHED_TRANSITIONS = 8
#: Fewest waveform samples accepted for ``max_points``.
MIN_POINTS = 16


def stuck_message(loop: Loop, t: float, vt: float, vs: float) -> str:
    """Why the loop stopped: the triangle is held at a swing limit short of a threshold beyond
    it, or the integrator runs away from the threshold (its error voltage beats the swing)."""
    trip = loop.trip_level(vs)
    rate = loop.rate(vs)
    state = "high" if vs >= loop.v_mid else "low"
    where = (
        f"at t = {format_value(t, 's', 4)} the square is {state} ({vs:.4g} V) and the comparator "
        f"flips only when the triangle reaches {trip:.4g} V"
    )
    if rate != 0 and (rate > 0) == (trip > vt):
        side = "upper" if rate > 0 else "lower"
        return (
            f"the loop does not oscillate: {where}, but the integrator output stops at its "
            f"{side} swing limit {vt:.4g} V (output range {loop.v_low:.4g} V to "
            f"{loop.v_high:.4g} V): the thresholds lie beyond the integrator's swing. Reduce "
            f"R1/R2 (now {loop.r1 / loop.r2:.4g}) or widen the swing."
        )
    return (
        f"the loop does not oscillate: {where}, but the triangle sits at {vt:.4g} V with the "
        f"integrator driven at {rate:.4g} V/s, away from that level: its error voltage "
        f"Vos1 + Ib1·R3 = {loop.vos1 + loop.ib1 * loop.r3:.4g} V lies outside the square's "
        f"swing about the reference ({loop.v_low - loop.v_ref:.4g} V to "
        f"{loop.v_high - loop.v_ref:.4g} V)."
    )


def _slew_text(rate: float) -> str:
    return "infinite" if math.isinf(rate) else format_value(rate, "V/s", 3)


def unfinished_message(loop: Loop, t: float, turns: list[float]) -> str:
    distinct = sorted({f"{v:.4g} V" for v in turns})
    levels = (
        " and ".join(distinct)
        if len(distinct) <= 2
        else f"{min(turns):.4g} V to {max(turns):.4g} V"
    )
    return (
        f"the loop does not oscillate properly: by t = {format_value(t, 's', 4)} the square has "
        f"turned back {len(turns)} times without crossing its mid-swing level "
        f"{loop.v_mid:.4g} V (it reverses at {levels}, its levels are {loop.v_low:.4g} V and "
        f"{loop.v_high:.4g} V): each comparator transition "
        f"(slew {_slew_text(loop.slew_rise)} up, "
        f"{_slew_text(loop.slew_fall)} down, delay "
        f"{format_value(loop.delay, 's', 3)}) lasts longer than the triangle takes to cross "
        f"back over its threshold. Widen the hysteresis (R1/R2 = {loop.r1 / loop.r2:.4g}), "
        "slow the ramp (R3·C1) or use a faster comparator."
    )
