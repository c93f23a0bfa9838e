"""Design checks of the comparator-IC loop: supply ranges, input common-mode ranges, output
currents, the pull-up's power, the integrator's swing and slew, C1, and edges against the
period. Codes: supply_range, input_common_mode, load_comparator, load_integrator,
resistor_power, pull_up_load (open drain: the stiffness rule of ``stagelevels.
PULL_UP_LOAD_SHARE``, a design rule), swing_integrator, slew_integrator, transition_time and
C1's own (``checks.capacitor_checks``). The margins (50 % of a current or power rating, 2x
slew, 2 % of the period) are common practice; currents and voltages come from Ohm's law on
the model's levels and peaks.
"""

from __future__ import annotations

from tristock.circuits.checks import (
    Warning,
    capacitor_checks,
    common_mode_checks,
    common_mode_range,
    load_limit,
    percent,
    supply_range,
    volts,
)
from tristock.circuits.comparator_schmitt.commonmode import plus_input_swing
from tristock.circuits.comparator_schmitt.point import ComparatorOscillator
from tristock.circuits.comparator_schmitt.stagelevels import PULL_UP_LOAD_SHARE
from tristock.stock.comparators import EDGE_SHARE
from tristock.stock.parts import Capacitor, OpAmp, Resistor

SLEW_MARGIN = 2.0
TIME_CAUTION = 0.02


def _levels(osc: ComparatorOscillator) -> tuple[float, float, float, float, float]:
    """(peak_hi, peak_lo, high level at the top peak, high level at the bottom peak, -L), V
    from the reference; an open-drain high level follows the triangle with slope γ
    (``physics.high_level``) about its value at mid triangle."""
    p = osc.prediction()
    hi, lo, mid = float(p.peak_high_v), float(p.peak_low_v), float(p.square_high_v)
    gamma = 0.0
    if osc.comparator.is_open_drain:
        r12 = osc.r1 + osc.r2
        gamma = osc.r5 / r12 / (1.0 + osc.r5 / r12 + osc.r5 / osc.r3)
    th_mid = (float(p.threshold_high_v) + float(p.threshold_low_v)) / 2.0
    return hi, lo, mid + gamma * (hi - th_mid), mid + gamma * (lo - th_mid), float(p.square_low_v)


def input_checks(osc: ComparatorOscillator, u1: OpAmp) -> list[Warning]:
    """U2's + input, (R2·vt + R1·vs)/(R1 + R2), widest just after each switch
    (``commonmode.plus_input_swing``, the numbers the search's acceptance takes); U2's -
    input and U1's inputs at the reference (plus the offsets)."""
    rails, u2 = osc.rails, osc.comparator
    ref = rails.reference_v
    r5 = osc.r5 if u2.is_open_drain else 0.0
    bottom_rel, top_rel = plus_input_swing(osc.prediction(), osc.r1, osc.r2, osc.r3, r5)
    top, bottom = ref + float(top_rel), ref + float(bottom_rel)
    on = (rails.v_pos, rails.v_neg)
    cm2 = common_mode_range(rails.v_pos, rails.v_neg, u2.input_cm_neg_v, u2.input_cm_pos_headroom_v)
    cm1 = common_mode_range(rails.v_pos, rails.v_neg, u1.input_cm_neg_v, u1.input_cm_pos_headroom_v)
    return common_mode_checks(
        f"U2's + input ({u2.id})", min(bottom, ref), max(top, ref), on, cm2
    ) + common_mode_checks(
        f"U1's inputs ({u1.id})", ref + osc.opamp.offset_v, ref + osc.opamp.offset_v, on, cm1
    )


def load_checks(osc: ComparatorOscillator, u1: OpAmp, r5: Resistor | None) -> list[Warning]:
    """U2's output current (push-pull: source and sink; open-drain: the sink takes the pull-up
    as well), U1's (R1 + R2 and C1's current), and R5's power with the output low."""
    rails, u2 = osc.rails, osc.comparator
    hi, lo, h_top, _, low = _levels(osc)
    r12 = osc.r1 + osc.r2
    ve = osc.opamp.offset_v + osc.opamp.bias_a * osc.r3
    sink = (ve - low) / osc.r3 + (hi - low) / r12
    source = (h_top - ve) / osc.r3 + (h_top - lo) / r12
    out: list[Warning] = []
    if u2.is_open_drain:
        pull = (rails.v_pos - (rails.reference_v + low)) / osc.r5
        sink += pull
        load = osc.r5 * (1.0 / osc.r3 + 1.0 / osc.r2)
        if load > PULL_UP_LOAD_SHARE:
            out.append(
                Warning(
                    "pull_up_load",
                    "error",
                    f"R5·(1/R3 + 1/R2) = {load:.3g} > {PULL_UP_LOAD_SHARE:g}: the load takes "
                    "too much of the pull-up's current (the stiffness rule of the circuit "
                    "designed)",
                )
            )
        found = [
            load_limit(
                "load_comparator",
                sink,
                u2.output_a,
                f"U2 {u2.id} sinks {volts(sink, 'A')} (R5 {volts(pull, 'A')}), which",
            )
        ]
        if r5 is not None:
            power = pull**2 * osc.r5
            found.append(
                load_limit(
                    "resistor_power",
                    power,
                    r5.power_w,
                    f"R5 {r5.id} dissipates {volts(power, 'W')} with U2 low, which",
                )
            )
    else:
        drawn = max(sink, source)
        found = [
            load_limit(
                "load_comparator",
                drawn,
                u2.output_a,
                f"U2 {u2.id} output current {volts(drawn, 'A')}, which",
            )
        ]
    i1 = max(h_top - lo, hi - low) / r12 + max(h_top - ve, ve - low) / osc.r3
    found.append(
        load_limit(
            "load_integrator", i1, u1.output_a, f"U1 {u1.id} output current {volts(i1, 'A')}, which"
        )
    )
    return out + [w for w in found if w]


def integrator_checks(osc: ComparatorOscillator, u1: OpAmp) -> list[Warning]:
    """The triangle inside U1's swing; U1's slew rate against the steeper ramp."""
    rails, p = osc.rails, osc.prediction()
    ref = rails.reference_v
    out: list[Warning] = []
    top, bottom = rails.v_pos - u1.swing_pos_v, rails.v_neg + u1.swing_neg_v
    high, low = ref + float(p.peak_high_v), ref + float(p.peak_low_v)
    for peak, limit, clips in ((high, top, high > top), (low, bottom, low < bottom)):
        if clips:
            out.append(
                Warning(
                    "swing_integrator",
                    "error",
                    f"the triangle reaches {volts(peak, 'V')}, beyond U1's output "
                    f"swing limit {volts(limit, 'V')}: it clips",
                )
            )
    ratio = u1.slew_v_per_s / float(p.slope_v_per_s)
    if ratio < SLEW_MARGIN:
        out.append(
            Warning(
                "slew_integrator",
                "error" if ratio < 1.0 else "caution",
                f"U1's slew rate is {ratio:.3g}x the triangle's slope "
                f"{float(p.slope_v_per_s) * 1e-6:.3g} V/µs (need {SLEW_MARGIN:g}x)",
            )
        )
    return out


def check(
    osc: ComparatorOscillator, u1: OpAmp, capacitor: Capacitor, r5: Resistor | None
) -> list[Warning]:
    """Every check of the board (module docstring)."""
    rails, u2, p = osc.rails, osc.comparator, osc.prediction()
    out = supply_range(rails.span_v, u1.supply_min_v, u1.supply_max_v)
    if not u2.supply_min_v <= rails.span_v <= u2.supply_max_v:
        out.append(
            Warning(
                "supply_range",
                "error",
                f"supply span {volts(rails.span_v, 'V')} is outside U2 {u2.id}'s "
                f"{volts(u2.supply_min_v, 'V')} to {volts(u2.supply_max_v, 'V')}",
            )
        )
    out += input_checks(osc, u1) + load_checks(osc, u1, r5) + integrator_checks(osc, u1)
    v_cap = max(abs(float(p.peak_high_v)), abs(float(p.peak_low_v))) + abs(osc.opamp.offset_v)
    out += capacitor_checks("C1", capacitor, v_cap, "the integrator capacitor sees both polarities")
    edges = (u2.rise_s + u2.fall_s) / EDGE_SHARE / float(p.period_s)
    if edges > TIME_CAUTION:
        out.append(
            Warning(
                "transition_time",
                "caution",
                f"U2's edges take {percent(edges)} of the period: the period and "
                "duty depend on their shape",
            )
        )
    return out
