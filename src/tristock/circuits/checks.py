"""Design checks: where a built oscillator strains its parts or leaves the model's ground.

``check`` returns a list of ``Warning`` (empty when all is well), each with a short stable
code, a severity ("caution": works, with less margin than common practice asks; "error":
out of rating or outside what the model can predict) and a plain message with numbers.

Codes: slew_integrator, swing_integrator, supply_range, load_comparator, load_integrator,
cap_voltage, resistor_power, cap_class_ii, cap_polarised, cap_small, transition_time,
gbw_delay.
The margins (2x slew, 50 % of a current or power rating, 2x capacitor voltage, 10 % swing
headroom, 2 %/20 % of the period) are common practice, not taken from a standard.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Literal

from tristock.circuits.oscillator import Oscillator, square_levels
from tristock.stock.parts import Capacitor, OpAmp, Resistor
from tristock.stock.units import format_value

Severity = Literal["caution", "error"]

RESISTOR_DESIGNATORS = ("R1", "R2", "R3")

SLEW_MARGIN = 2.0  # integrator slew rate / triangle slope, at least
LOAD_CAUTION = 0.5  # fraction of the rated output current or power
SWING_MARGIN = 0.10  # fraction of the available swing kept free beyond each triangle peak
CAP_VOLTAGE_MARGIN = 2.0  # rated voltage / peak voltage, at least
TIME_CAUTION = 0.02  # fraction of the period
TIME_ERROR = 0.20
#: Below this an integrator capacitor is comparable with board and pin capacitance (a few pF).
SMALL_CAPACITOR_F = 100e-12


@dataclass(frozen=True)
class Warning:  # a finding, never raised; shadows the builtin inside this module only
    """One finding: ``code`` (stable), ``severity`` and a plain ``message`` with numbers."""

    code: str
    severity: Literal["caution", "error"]
    message: str


def _v(x: float, unit: str) -> str:
    return format_value(x, unit, digits=3)


def _pct(x: float) -> str:
    return f"{100.0 * x:.3g} %"


def _limit(
    code: str, used: float, rating: float, what: str, caution_at: float = LOAD_CAUTION
) -> Warning | None:
    """A load (current or power) against its rating: caution above caution_at, error above 1."""
    frac = used / rating
    if frac > 1.0:
        return Warning(code, "error", f"{what} is {_pct(frac)} of its rating: over the limit")
    if frac > caution_at:
        return Warning(
            code, "caution", f"{what} is {_pct(frac)} of its rating (keep below {_pct(caution_at)})"
        )
    return None


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

    p = osc.prediction()
    m = osc.opamp
    vh, vl = square_levels(osc.rails, m)
    peak_hi, peak_lo = float(p.peak_high_v), float(p.peak_low_v)
    period = float(p.period_s)
    rc = osc.r3 * osc.c1
    ve = m.offset_v + m.bias_a * osc.r3
    drive_down, drive_up = vh - ve, vl + ve  # square high: ramp down; square low: ramp up
    out: list[Warning] = []

    # integrator slew rate against the triangle's ramps (its output rises while square is low)
    for slope, rate, edge in (
        (drive_up / rc, m.slew_rise_v_per_s, "rising"),
        (drive_down / rc, m.slew_fall_v_per_s, "falling"),
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

    # integrator output swing against the triangle's peaks, each side
    for peak, room, side, where in (
        (peak_hi, vh, "top", "above"),
        (-peak_lo, vl, "bottom", "below"),
    ):
        ref_txt = _v(osc.rails.reference_v, "V")
        if peak > room:
            out.append(
                Warning(
                    "swing_integrator",
                    "error",
                    f"triangle {side} peak {_v(peak, 'V')} {where} the reference ({ref_txt}) is "
                    f"beyond the integrator's swing {_v(room, 'V')}: it clips",
                )
            )
        elif room - peak < SWING_MARGIN * room:
            out.append(
                Warning(
                    "swing_integrator",
                    "caution",
                    f"triangle {side} peak {_v(peak, 'V')} {where} the reference ({ref_txt}) "
                    f"leaves {_v(room - peak, 'V')} of the integrator's swing {_v(room, 'V')} "
                    f"(keep {_pct(SWING_MARGIN)} free)",
                )
            )

    # supply span
    s_min = opamp_part.supply_min_v if opamp_part else m.supply_min_v
    s_max = opamp_part.supply_max_v if opamp_part else m.supply_max_v
    span = osc.rails.span_v
    if not s_min <= span <= s_max:
        out.append(
            Warning(
                "supply_range",
                "error",
                f"supply span {_v(span, 'V')} is outside the op amp's {_v(s_min, 'V')} to "
                f"{_v(s_max, 'V')}",
            )
        )

    # output currents: R3 carries (square - Vos1)/R3 into C1; R1 + R2 carry the square-to-
    # triangle difference; the comparator sources what the integrator sinks, and vice versa
    r12 = osc.r1 + osc.r2
    i_r3 = max(vh - m.offset_v, vl + m.offset_v) / osc.r3
    i_r12 = max(vh - peak_lo, vl + peak_hi) / r12
    i_load = max(
        (vh - m.offset_v) / osc.r3 + (vh - peak_lo) / r12,
        (vl + m.offset_v) / osc.r3 + (vl + peak_hi) / r12,
    )
    rating = opamp_part.output_a if opamp_part else m.output_a
    if math.isfinite(rating):
        for code, who in (("load_comparator", "comparator"), ("load_integrator", "integrator")):
            w = _limit(
                code,
                i_load,
                rating,
                f"{who} output current {_v(i_load, 'A')} (R3/C1 {_v(i_r3, 'A')} + R1+R2 "
                f"{_v(i_r12, 'A')}, rated {_v(rating, 'A')})",
            )
            if w:
                out.append(w)

    # the capacitor
    if capacitor is not None and capacitor.value_f < SMALL_CAPACITOR_F:
        out.append(
            Warning(
                "cap_small",
                "caution",
                f"C1 {capacitor.id} is {_v(capacitor.value_f, 'F')}: board and op-amp input "
                "capacitance (a few pF) add to it and shift the frequency; keep the layout "
                "around the integrator's inverting input small",
            )
        )
    if capacitor is not None:
        v_cap = max(abs(peak_hi - m.offset_v), abs(peak_lo - m.offset_v))
        rated = capacitor.voltage_v
        if rated < v_cap:
            out.append(
                Warning(
                    "cap_voltage",
                    "error",
                    f"C1 {capacitor.id} is rated {_v(rated, 'V')} but sees {_v(v_cap, 'V')}",
                )
            )
        elif rated < CAP_VOLTAGE_MARGIN * v_cap:
            out.append(
                Warning(
                    "cap_voltage",
                    "caution",
                    f"C1 {capacitor.id} is rated {_v(rated, 'V')}, {rated / v_cap:.3g}x the "
                    f"{_v(v_cap, 'V')} it sees (keep {CAP_VOLTAGE_MARGIN:g}x)",
                )
            )
        if capacitor.is_class_ii:
            out.append(
                Warning(
                    "cap_class_ii",
                    "caution",
                    f"C1 {capacitor.id} is {capacitor.dielectric}, a class II ceramic: its value "
                    "moves with temperature and DC bias, and the frequency with it",
                )
            )
        if capacitor.is_polarised:
            out.append(
                Warning(
                    "cap_polarised",
                    "error",
                    f"C1 {capacitor.id} is polarised ({capacitor.dielectric}) but the integrator "
                    "capacitor sees both polarities",
                )
            )

    # resistor power, worst case
    v_r3 = max(vh - m.offset_v, vl + m.offset_v)
    worst_power = {
        "R1": i_r12**2 * osc.r1,
        "R2": i_r12**2 * osc.r2,
        "R3": v_r3**2 / osc.r3,
    }
    for des in RESISTOR_DESIGNATORS:
        if des in resistors:
            part = resistors[des]
            w = _limit(
                "resistor_power",
                worst_power[des],
                part.power_w,
                f"{des} {part.id} dissipates up to {_v(worst_power[des], 'W')} "
                f"(rated {_v(part.power_w, 'W')}), which",
            )
            if w:
                out.append(w)

    # comparator transition time against the period
    tau = (vh + vl) / min(m.slew_rise_v_per_s, m.slew_fall_v_per_s)
    frac = tau / period
    if frac > TIME_CAUTION:
        sev = "error" if frac > TIME_ERROR else "caution"
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
                f"comparator transition {_v(tau, 's')} is {_pct(frac)} of the period "
                f"{_v(period, 's')}: {tail}",
            )
        )

    # what the op amps' finite gain-bandwidth (both channels) adds to the period
    if math.isfinite(m.gbw_hz):
        without = dataclasses.replace(osc, opamp=dataclasses.replace(m, gbw_hz=math.inf))
        dt_gbw = period - without.period_s
        frac = dt_gbw / period
        if frac > TIME_CAUTION:
            sev = "error" if frac > TIME_ERROR else "caution"
            out.append(
                Warning(
                    "gbw_delay",
                    sev,
                    f"the op amp's gain-bandwidth {_v(m.gbw_hz, 'Hz')} adds {_v(dt_gbw, 's')} "
                    f"({_pct(frac)}) to the period (the comparator's build-up, the "
                    "integrator's lag and slower ramps); the model takes a single-pole op amp, "
                    "so a part with more poles moves the period by a share of that",
                )
            )
    return out


class DoesNotOscillate(ValueError):
    """A loop that cannot oscillate; the message says why, with numbers."""


def oscillation_failure(osc: Oscillator) -> str | None:
    """Why ``osc`` cannot oscillate, or None when it can.

    The integrator's output stops at the square levels +VH and -VL (the same op amp, the same
    swing). Rising (square low) the triangle must reach the upper threshold
    th_hi = VL·k + s below VH; falling, the lower threshold th_lo = -VH·k + s above -VL
    (k = R1/R2, s the comparator offset shift; see ``circuit.predict``). Otherwise the
    integrator saturates first and the loop latches: with s = 0 that is k >= min(VH/VL, VL/VH).
    """
    p = osc.prediction()
    vh, vl = float(p.square_high_v), -float(p.square_low_v)
    th_hi, th_lo = float(p.threshold_high_v), float(p.threshold_low_v)
    if th_hi < vh and th_lo > -vl:
        return None
    side, threshold, limit = ("upper", th_hi, vh) if th_hi >= vh else ("lower", th_lo, -vl)
    return (
        f"the loop cannot oscillate: its {side} threshold {_v(threshold, 'V')} lies beyond the "
        f"integrator's output swing {_v(limit, 'V')} (from the reference), so the integrator "
        f"saturates before the comparator flips; R1/R2 is {osc.k:.4g}, it must stay below "
        f"{min(vh / vl, vl / vh):.4g} on these rails"
    )
