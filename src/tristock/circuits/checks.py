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
