"""Design checks of the op-amp Schmitt loop: where a built oscillator strains its parts or
leaves the model's ground.

``check`` returns a list of ``Warning`` (empty when all is well; see ``circuits.checks``).
Codes: slew_integrator, swing_integrator, supply_range, load_comparator, load_integrator,
input_common_mode, cap_voltage, resistor_power, cap_class_ii, cap_polarised, cap_small,
transition_time, gbw_delay. The margins (2x slew, 50 % of a current or power rating, 2x
capacitor voltage, 10 % swing headroom, 2 %/20 % of the period) are common practice, not taken
from a standard.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

from tristock.circuits.checks import (
    Severity,
    Warning,
    capacitor_checks,
    common_mode_checks,
    common_mode_range,
    load_limit,
    percent,
    supply_range,
    volts,
)
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.stock.parts import Capacitor, OpAmp, Resistor

RESISTOR_DESIGNATORS = ("R1", "R2", "R3")

SLEW_MARGIN = 2.0  # integrator slew rate / triangle slope, at least
SWING_MARGIN = 0.10  # fraction of the available swing kept free beyond each triangle peak
TIME_CAUTION = 0.02  # fraction of the period
TIME_ERROR = 0.20


@dataclass(frozen=True)
class Loop:
    """The figures every check reads: square levels VH, VL (V from the reference), the
    triangle's peaks (V), the period (s), R3·C1 (s), the integrator's drives (V) and the
    op amp's model."""

    osc: Oscillator
    m: OpAmpModel
    vh: float
    vl: float
    peak_hi: float
    peak_lo: float
    period: float
    rc: float
    drive_down: float  # square high: the triangle ramps down
    drive_up: float

    @classmethod
    def of(cls, osc: Oscillator) -> Loop:
        p = osc.prediction()
        m = osc.opamp
        vh, vl = square_levels(osc.rails, m)
        ve = m.offset_v + m.bias_a * osc.r3
        return cls(
            osc, m, vh, vl, float(p.peak_high_v), float(p.peak_low_v), float(p.period_s),
            osc.r3 * osc.c1, vh - ve, vl + ve,
        )  # fmt: skip


def slew_checks(lp: Loop) -> list[Warning]:
    """The integrator's slew rate against the triangle's ramps (its output rises while the
    square is low)."""
    out: list[Warning] = []
    for slope, rate, edge in (
        (lp.drive_up / lp.rc, lp.m.slew_rise_v_per_s, "rising"),
        (lp.drive_down / lp.rc, lp.m.slew_fall_v_per_s, "falling"),
    ):
        ratio = rate / slope
        if ratio < SLEW_MARGIN:
            sev: Severity = "error" if ratio < 1.0 else "caution"
            out.append(
                Warning(
                    "slew_integrator",
                    sev,
                    f"integrator slew rate {rate * 1e-6:.3g} V/µs is {ratio:.3g}x the "
                    f"triangle's {edge} slope {slope * 1e-6:.3g} V/µs "
                    f"(need at least {SLEW_MARGIN:g}x)",
                )
            )
    return out


def swing_checks(lp: Loop) -> list[Warning]:
    """The integrator's output swing against the triangle's peaks, each side."""
    out: list[Warning] = []
    for peak, room, side, where in (
        (lp.peak_hi, lp.vh, "top", "above"),
        (-lp.peak_lo, lp.vl, "bottom", "below"),
    ):
        ref_txt = volts(lp.osc.rails.reference_v, "V")
        if peak > room:
            out.append(
                Warning(
                    "swing_integrator",
                    "error",
                    f"triangle {side} peak {volts(peak, 'V')} {where} the reference ({ref_txt}) "
                    f"is beyond the integrator's swing {volts(room, 'V')}: it clips",
                )
            )
        elif room - peak < SWING_MARGIN * room:
            out.append(
                Warning(
                    "swing_integrator",
                    "caution",
                    f"triangle {side} peak {volts(peak, 'V')} {where} the reference ({ref_txt}) "
                    f"leaves {volts(room - peak, 'V')} of the integrator's swing "
                    f"{volts(room, 'V')} (keep {percent(SWING_MARGIN)} free)",
                )
            )
    return out


def currents(lp: Loop) -> tuple[float, float, float]:
    """(I_R3, I_R1+R2, I_load) in A: R3 carries (square - Vos1)/R3 into C1; R1 + R2 carry the
    square-to-triangle difference; the comparator sources what the integrator sinks, and
    vice versa."""
    osc, m = lp.osc, lp.m
    r12 = osc.r1 + osc.r2
    i_r3 = max(lp.vh - m.offset_v, lp.vl + m.offset_v) / osc.r3
    i_r12 = max(lp.vh - lp.peak_lo, lp.vl + lp.peak_hi) / r12
    i_load = max(
        (lp.vh - m.offset_v) / osc.r3 + (lp.vh - lp.peak_lo) / r12,
        (lp.vl + m.offset_v) / osc.r3 + (lp.vl + lp.peak_hi) / r12,
    )
    return i_r3, i_r12, i_load


def load_checks(lp: Loop, rating: float) -> list[Warning]:
    """Both channels' output current against ``rating`` (A)."""
    if not math.isfinite(rating):
        return []
    i_r3, i_r12, i_load = currents(lp)
    found = (
        load_limit(
            code,
            i_load,
            rating,
            f"{who} output current {volts(i_load, 'A')} (R3/C1 {volts(i_r3, 'A')} + R1+R2 "
            f"{volts(i_r12, 'A')}, rated {volts(rating, 'A')})",
        )
        for code, who in (("load_comparator", "comparator"), ("load_integrator", "integrator"))
    )
    return [w for w in found if w]


def resistor_power_checks(lp: Loop, resistors: dict[str, Resistor]) -> list[Warning]:
    """Each resistor's worst-case dissipation against its rating."""
    _, i_r12, _ = currents(lp)
    osc, m = lp.osc, lp.m
    v_r3 = max(lp.vh - m.offset_v, lp.vl + m.offset_v)
    worst_power = {"R1": i_r12**2 * osc.r1, "R2": i_r12**2 * osc.r2, "R3": v_r3**2 / osc.r3}
    out: list[Warning] = []
    for des in RESISTOR_DESIGNATORS:
        if des in resistors:
            part = resistors[des]
            w = load_limit(
                "resistor_power",
                worst_power[des],
                part.power_w,
                f"{des} {part.id} dissipates up to {volts(worst_power[des], 'W')} "
                f"(rated {volts(part.power_w, 'W')}), which",
            )
            if w:
                out.append(w)
    return out


def input_range_checks(lp: Loop, part: OpAmp) -> list[Warning]:
    """Both channels' inputs against the part's common-mode range: the trigger's + input
    (triangle through R1, square through R2: (R2·vt + R1·vs)/(R1 + R2), widest just after
    each switch, with the triangle at its peak) and the integrator's inputs (at the
    reference plus Vos1)."""
    osc = lp.osc
    rails = osc.rails
    ref = rails.reference_v
    cm = common_mode_range(
        rails.v_pos, rails.v_neg, part.input_cm_neg_v, part.input_cm_pos_headroom_v
    )
    r12 = osc.r1 + osc.r2
    top = (osc.r2 * lp.peak_hi + osc.r1 * lp.vh) / r12
    bottom = (osc.r2 * lp.peak_lo - osc.r1 * lp.vl) / r12
    on = (rails.v_pos, rails.v_neg)
    trigger = common_mode_checks("the trigger's + input (U1B)", ref + bottom, ref + top, on, cm)
    at = ref + lp.m.offset_v
    return trigger + common_mode_checks("the integrator's inputs (U1A)", at, at, on, cm)


def timing_checks(lp: Loop) -> list[Warning]:
    """The comparator's transition and what both channels' finite GBW add, against the
    period."""
    out: list[Warning] = []
    m, period = lp.m, lp.period
    tau = (lp.vh + lp.vl) / min(m.slew_rise_v_per_s, m.slew_fall_v_per_s)
    frac = tau / period
    if frac > TIME_CAUTION:
        sev: Severity = "error" if frac > TIME_ERROR else "caution"
        tail = (
            "the model is no longer trustworthy (a transition must finish well before the "
            "next threshold)"
            if sev == "error"
            else "the period depends on the slew rate"
        )
        out.append(
            Warning(
                "transition_time",
                sev,
                f"comparator transition {volts(tau, 's')} is {percent(frac)} of the period "
                f"{volts(period, 's')}: {tail}",
            )
        )
    if math.isfinite(m.gbw_hz):
        without = dataclasses.replace(lp.osc, opamp=dataclasses.replace(m, gbw_hz=math.inf))
        dt_gbw = period - without.period_s
        frac = dt_gbw / period
        if frac > TIME_CAUTION:
            sev = "error" if frac > TIME_ERROR else "caution"
            out.append(
                Warning(
                    "gbw_delay",
                    sev,
                    f"the op amp's gain-bandwidth {volts(m.gbw_hz, 'Hz')} adds "
                    f"{volts(dt_gbw, 's')} ({percent(frac)}) to the period (the comparator's "
                    "build-up, the integrator's lag and slower ramps); the model takes a "
                    "single-pole op amp, so a part with more poles moves the period by a share "
                    "of that",
                )
            )
    return out


def check(
    osc: Oscillator,
    *,
    capacitor: Capacitor | None = None,
    resistors: dict[str, Resistor] | None = None,
    opamp_part: OpAmp | None = None,
) -> list[Warning]:
    """Every check that applies to ``osc`` (and the given parts); see the module docstring.

    ``resistors`` maps designators R1, R2, R3 to their parts (any subset); ``opamp_part``,
    when given, supplies the catalogued supply range and output current (else ``osc.opamp``).
    Voltages are from the reference node; the integrator's inverting input sits at
    reference + Vos1.
    """
    resistors = dict(resistors or {})
    unknown = sorted(set(resistors) - set(RESISTOR_DESIGNATORS))
    if unknown:
        raise ValueError(
            f"resistors: unknown designator(s) {', '.join(unknown)} (expected R1, R2, R3)"
        )
    lp = Loop.of(osc)
    m = lp.m
    out = slew_checks(lp) + swing_checks(lp)
    s_min = opamp_part.supply_min_v if opamp_part else m.supply_min_v
    s_max = opamp_part.supply_max_v if opamp_part else m.supply_max_v
    out += supply_range(osc.rails.span_v, s_min, s_max)
    out += load_checks(lp, opamp_part.output_a if opamp_part else m.output_a)
    if opamp_part is not None:
        out += input_range_checks(lp, opamp_part)
    if capacitor is not None:
        v_cap = max(abs(lp.peak_hi - m.offset_v), abs(lp.peak_lo - m.offset_v))
        why = "the integrator capacitor sees both polarities"
        out += capacitor_checks("C1", capacitor, v_cap, why)
    return out + resistor_power_checks(lp, resistors) + timing_checks(lp)


def oscillation_failure(osc: Oscillator) -> str | None:
    """Why ``osc`` cannot oscillate, or None when it can.

    The integrator's output stops at the square levels +VH and -VL (the same op amp, the same
    swing). Rising (square low) the triangle must reach the upper threshold
    th_hi = VL·k + s below VH; falling, the lower threshold th_lo = -VH·k + s above -VL
    (k = R1/R2, s the comparator offset shift; see ``physics.predict``). Otherwise the
    integrator saturates first and the loop latches: with s = 0 that is k >= min(VH/VL, VL/VH).
    """
    p = osc.prediction()
    vh, vl = float(p.square_high_v), -float(p.square_low_v)
    th_hi, th_lo = float(p.threshold_high_v), float(p.threshold_low_v)
    if th_hi < vh and th_lo > -vl:
        return None
    side, threshold, limit = ("upper", th_hi, vh) if th_hi >= vh else ("lower", th_lo, -vl)
    return (
        f"the loop cannot oscillate: its {side} threshold {volts(threshold, 'V')} lies beyond the "
        f"integrator's output swing {volts(limit, 'V')} (from the reference), so the integrator "
        f"saturates before the comparator flips; R1/R2 is {osc.k:.4g}, it must stay below "
        f"{min(vh / vl, vl / vh):.4g} on these rails"
    )
