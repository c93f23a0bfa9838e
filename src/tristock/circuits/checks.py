"""Design checks shared by every topology: the finding type, load limits against ratings,
the supply span and a capacitor's own checks (size, voltage, dielectric).

A ``Warning`` has a short stable code, a severity ("caution": works, with less margin than
common practice asks; "error": out of rating or outside what the model can predict) and a
plain message with numbers. The margins (50 % of a current or power rating, 2x capacitor
voltage) are common practice, not taken from a standard. Each topology adds its own checks
(``opamp_schmitt.checks``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from tristock.stock.parts import Capacitor
from tristock.stock.units import format_value

Severity = Literal["caution", "error"]

LOAD_CAUTION = 0.5  # fraction of the rated output current or power
CAP_VOLTAGE_MARGIN = 2.0  # rated voltage / peak voltage, at least
#: Below this an integrator capacitor is comparable with board and pin capacitance (a few pF).
SMALL_CAPACITOR_F = 100e-12


@dataclass(frozen=True)
class Warning:  # a finding, never raised; shadows the builtin inside this module only
    """One finding: ``code`` (stable), ``severity`` and a plain ``message`` with numbers."""

    code: str
    severity: Literal["caution", "error"]
    message: str


class DoesNotOscillate(ValueError):
    """A loop that cannot oscillate; the message says why, with numbers."""


def volts(x: float, unit: str) -> str:
    """A value with its unit, three digits (``format_value``)."""
    return format_value(x, unit, digits=3)


def percent(x: float) -> str:
    return f"{100.0 * x:.3g} %"


def load_limit(
    code: str, used: float, rating: float, what: str, caution_at: float = LOAD_CAUTION
) -> Warning | None:
    """A load (current or power) against its rating: caution above caution_at, error above 1."""
    frac = used / rating
    if frac > 1.0:
        return Warning(code, "error", f"{what} is {percent(frac)} of its rating: over the limit")
    if frac > caution_at:
        return Warning(
            code,
            "caution",
            f"{what} is {percent(frac)} of its rating (keep below {percent(caution_at)})",
        )
    return None


def supply_range(span: float, s_min: float, s_max: float) -> list[Warning]:
    """The supply span (V) against an op amp's rated span."""
    if s_min <= span <= s_max:
        return []
    return [
        Warning(
            "supply_range",
            "error",
            f"supply span {volts(span, 'V')} is outside the op amp's {volts(s_min, 'V')} to "
            f"{volts(s_max, 'V')}",
        )
    ]


def capacitor_checks(name: str, capacitor: Capacitor, v_cap: float, why: str) -> list[Warning]:
    """A timing capacitor ``name`` that sees up to ``v_cap`` volts: small against stray
    capacitance, its voltage rating, class II dielectric, polarised (``why`` says where both
    polarities come from)."""
    out: list[Warning] = []
    if capacitor.value_f < SMALL_CAPACITOR_F:
        out.append(
            Warning(
                "cap_small",
                "caution",
                f"{name} {capacitor.id} is {volts(capacitor.value_f, 'F')}: board and op-amp "
                "input capacitance (a few pF) add to it and shift the frequency; keep the "
                "layout around the integrator's inverting input small",
            )
        )
    rated = capacitor.voltage_v
    if rated < v_cap:
        out.append(
            Warning(
                "cap_voltage",
                "error",
                f"{name} {capacitor.id} is rated {volts(rated, 'V')} but sees {volts(v_cap, 'V')}",
            )
        )
    elif rated < CAP_VOLTAGE_MARGIN * v_cap:
        out.append(
            Warning(
                "cap_voltage",
                "caution",
                f"{name} {capacitor.id} is rated {volts(rated, 'V')}, {rated / v_cap:.3g}x the "
                f"{volts(v_cap, 'V')} it sees (keep {CAP_VOLTAGE_MARGIN:g}x)",
            )
        )
    if capacitor.is_class_ii:
        out.append(
            Warning(
                "cap_class_ii",
                "caution",
                f"{name} {capacitor.id} is {capacitor.dielectric}, a class II ceramic: its value "
                "moves with temperature and DC bias, and the frequency with it",
            )
        )
    if capacitor.is_polarised:
        out.append(
            Warning(
                "cap_polarised",
                "error",
                f"{name} {capacitor.id} is polarised ({capacitor.dielectric}) but {why}",
            )
        )
    return out


def common_mode_range(
    v_pos: float, v_neg: float, cm_neg_v: float | None, cm_pos_headroom_v: float | None
) -> tuple[float, float]:
    """An input's common-mode range (V to ground) on rails V+/V-: from V- + ``cm_neg_v`` to
    V+ - ``cm_pos_headroom_v``; a None end (a blank catalog cell) reaches its rail."""
    low = v_neg + (cm_neg_v if cm_neg_v is not None else 0.0)
    high = v_pos - (cm_pos_headroom_v if cm_pos_headroom_v is not None else 0.0)
    return low, high


def common_mode_checks(
    who: str,
    lowest_v: float,
    highest_v: float,
    rails: tuple[float, float],
    cm_range: tuple[float, float],
) -> list[Warning]:
    """An input that swings from ``lowest_v`` to ``highest_v`` (V to ground) against its
    common-mode range ``cm_range`` (``common_mode_range``) on ``rails`` (V+, V-): an error
    when it leaves the range. Below the range on a single supply (V- = 0) the message warns
    of phase reversal (many inputs invert their output there, latching the loop)."""
    low, high = cm_range
    v_pos, v_neg = rails
    out: list[Warning] = []
    if lowest_v < low:
        tail = (
            ": on a single supply the output may reverse phase there and latch the loop"
            if v_neg == 0.0
            else ""
        )
        out.append(
            Warning(
                "input_common_mode",
                "error",
                f"{who} reaches {volts(lowest_v, 'V')}, below its common-mode range "
                f"({volts(low, 'V')} to {volts(high, 'V')}){tail}",
            )
        )
    if highest_v > high:
        out.append(
            Warning(
                "input_common_mode",
                "error",
                f"{who} reaches {volts(highest_v, 'V')}, above its common-mode range "
                f"({volts(low, 'V')} to {volts(high, 'V')}, V+ = {volts(v_pos, 'V')})",
            )
        )
    return out
