"""Design checks of the set-duty loop. Codes: diode_reverse, diode_power, diode_leakage,
load_comparator, resistor_power, supply_range, slew_integrator and the capacitor's
(``circuits.checks.capacitor_checks``).

The margins are common practice, not from a standard: 50 % of a current or power rating; 2x
slew (``opampvariant.SLEW_MARGIN``); a reverse voltage above ``REVERSE_CAUTION_V`` asks for
the datasheet's rating (the diode table has no reverse-voltage column; small-signal diodes
are commonly rated 20-100 V); a reverse leakage above ``LEAK_CAUTION`` of the branch current
(the model includes it, but it grows steeply with temperature).
"""

from __future__ import annotations

from tristock.circuits.checks import Warning, load_limit, percent, supply_range, volts
from tristock.circuits.diode import saturation_current
from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.opampvariant import dissipation, integrator_capacitor, integrator_slew
from tristock.circuits.rails import square_levels
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Resistor

REVERSE_CAUTION_V = 20.0
LEAK_CAUTION = 0.005


def check(
    osc: DutyOscillator,
    *,
    opamp: OpAmp,
    resistors: dict[str, Resistor],
    capacitor: Capacitor,
    diodes: dict[str, Diode],
) -> list[Warning]:
    """Every check of the set-duty board (see the module notes)."""
    found: list[Warning] = []
    p = osc.prediction()
    point = osc.point()
    vh, vl = square_levels(osc.rails, osc.opamp)
    found += supply_range(osc.rails.span_v, opamp.supply_min_v, opamp.supply_max_v)
    i_a, i_b = osc.branch_currents()
    rows = (
        ("D3", "R3A", i_a, vl, point.vf4, point.rs4),  # D3 blocks while the square is low
        ("D4", "R3B", i_b, vh, point.vf3, point.rs3),
    )
    for designator, resistor, current, reverse, vf_other, rs_other in rows:
        diode = diodes[designator]
        if reverse > REVERSE_CAUTION_V:
            found.append(
                Warning(
                    "diode_reverse",
                    "caution",
                    f"{designator} {diode.id} blocks {volts(reverse, 'V')} in reverse: check its "
                    "rated reverse voltage (the table does not give it)",
                )
            )
        found += dissipation("diode_power", designator, current * diode.vf_v, diode.power_w)
        value = getattr(osc, resistor.lower())
        watts = (current * value) ** 2 / value
        found += dissipation("resistor_power", resistor, watts, resistors[resistor].power_w)
        leak = float(saturation_current(vf_other, rs_other, point.vt_therm))
        if leak > LEAK_CAUTION * current:
            other = "D4" if designator == "D3" else "D3"
            found.append(
                Warning(
                    "diode_leakage",
                    "caution",
                    f"{other} {diodes[other].id} leaks about {volts(leak, 'A')} in reverse, "
                    f"{percent(leak / current)} of {resistor}'s current: the model includes it, "
                    "but it grows steeply with temperature",
                )
            )
    peak = max(abs(float(p.peak_high_v)), abs(float(p.peak_low_v)))
    divider = (max(vh, vl) + peak) / (osc.r1 + osc.r2)
    w = load_limit(
        "load_comparator",
        max(i_a, i_b) + divider,
        opamp.output_a,
        "U1B output current (R3A or R3B and R1 + R2)",
    )
    found += [w] if w else []
    found += integrator_slew(p, osc.opamp)
    found += integrator_capacitor(p, osc.opamp, capacitor)
    return found
