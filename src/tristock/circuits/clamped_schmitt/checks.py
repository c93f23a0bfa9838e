"""Design checks of the zener-clamped loop. Codes: clamp_not_clamping, clamp_design_point,
zener_power,
load_comparator, resistor_power, supply_range, slew_integrator, comparator_buildup and the
capacitor's (``circuits.checks.capacitor_checks``).

The margins are common practice, not from a standard: the zener current at least
``CLAMP_ERROR`` (error) and ``CLAMP_CAUTION`` (caution) of its test current, or the level
rides on the op amp's swing; the zener current within ``designpoint.DESIGN_CURRENT`` of its
test current over the triangle's range (error: the rule of this circuit); 50 % of a current or
power rating; 2x slew
(``opampvariant.SLEW_MARGIN``); the comparator's GBW build-up (not in the model) under
``BUILDUP_CAUTION`` of the period.
"""

from __future__ import annotations

import math

import numpy as np

from tristock.circuits.checks import (
    Severity,
    Warning,
    load_limit,
    percent,
    supply_range,
    volts,
)
from tristock.circuits.clamped_schmitt.designpoint import (
    DESIGN_CURRENT,
    at_design_point,
    threshold_currents,
)
from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import Clamp
from tristock.circuits.opampvariant import dissipation, integrator_capacitor, integrator_slew
from tristock.circuits.rails import square_levels
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Resistor

CLAMP_ERROR = 0.1
CLAMP_CAUTION = 0.25
BUILDUP_CAUTION = 0.01


def clamp_currents(osc: ClampedOscillator) -> dict[str, tuple[float, float, float]]:
    """For each side ("high": D1 breaks, "low": D2 breaks): (least zener current (A), the
    op amp's output current into R5 (A, most), the square level there (V)) over the triangle's
    range (its two thresholds)."""
    p = osc.prediction()
    net = Clamp.of(osc.point())
    vh, vl = square_levels(osc.rails, osc.opamp)
    out: dict[str, tuple[float, float, float]] = {}
    for side, vo in (("high", vh), ("low", -vl)):
        levels = [
            net.level(vo, float(vt), side == "high")
            for vt in (p.threshold_low_v, p.threshold_high_v)
        ]
        currents = [float(i) for _, i in levels]
        outputs = [abs(vo - float(s)) / osc.r5 for s, _ in levels]
        out[side] = (min(currents), max(outputs), float(levels[0][0]))
    return out


def check(
    osc: ClampedOscillator,
    *,
    opamp: OpAmp,
    resistors: dict[str, Resistor],
    capacitor: Capacitor,
    zeners: dict[str, Diode],
) -> list[Warning]:
    """Every check of the clamped board (see the module notes)."""
    found: list[Warning] = []
    p = osc.prediction()
    found += supply_range(osc.rails.span_v, opamp.supply_min_v, opamp.supply_max_v)
    sides = clamp_currents(osc)
    found += design_point_check(osc)
    worst_out = 0.0
    for side, designator, other in (("high", "D1", "D2"), ("low", "D2", "D1")):
        least, out_a, level = sides[side]
        zener = zeners[designator]
        izt = zener.iz_test_a or 1e-3
        if least < CLAMP_CAUTION * izt:
            severity: Severity = "error" if least < CLAMP_ERROR * izt else "caution"
            found.append(
                Warning(
                    "clamp_not_clamping",
                    severity,
                    f"{designator} {zener.id} carries only {volts(least, 'A')} with the square "
                    f"{side} ({percent(least / izt)} of its {volts(izt, 'A')} test current): "
                    "the op amp's swing barely exceeds the clamp, so the level follows the rails; "
                    "lower R5 or pick a lower zener voltage",
                )
            )
        # the zener in breakdown drops the level less the other's forward drop (taken at 1 mA)
        power = out_a * (abs(level) - zeners[other].vf_v)
        found += dissipation("zener_power", designator, power, zener.power_w)
        worst_out = max(worst_out, out_a)
        vo = square_levels(osc.rails, osc.opamp)[0 if side == "high" else 1]
        r5_watts = (vo - abs(level)) ** 2 / osc.r5
        found += dissipation("resistor_power", "R5", r5_watts, resistors["R5"].power_w)
    load = worst_out + max(abs(float(p.peak_high_v)), abs(float(p.peak_low_v))) / (osc.r1 + osc.r2)
    w = load_limit("load_comparator", worst_out, opamp.output_a, "U1B output current into R5")
    found += [w] if w else []
    w = load_limit("load_integrator", load - worst_out, opamp.output_a, "U1A output current")
    found += [w] if w else []
    level = max(abs(float(p.square_high_v)), abs(float(p.square_low_v)))
    found += dissipation("resistor_power", "R3", level**2 / osc.r3, resistors["R3"].power_w)
    found += integrator_slew(p, osc.opamp)
    found += buildup_check(osc)
    found += integrator_capacitor(p, osc.opamp, capacitor)
    return found


def design_point_check(osc: ClampedOscillator) -> list[Warning]:
    """Error when the zener current leaves ``DESIGN_CURRENT`` times its test current over the
    triangle's thresholds (``designpoint``: the same function the search's rows use)."""
    p = osc.prediction()
    point = osc.point()
    vh, vl = square_levels(osc.rails, osc.opamp)
    net = Clamp.of(point)
    rest = (net.level(vh, 0.0, True)[0], -net.level(-vl, 0.0, False)[0])
    vt = (float(p.threshold_low_v), float(p.threshold_high_v))  # from the reference
    currents = threshold_currents(net, (vh, vl), rest, vt)
    if bool(at_design_point(currents, point.izt1, point.izt2)):
        return []
    lo, hi = DESIGN_CURRENT
    least = min(float(currents[0]) / float(point.izt1), float(currents[2]) / float(point.izt2))
    most = max(float(currents[1]) / float(point.izt1), float(currents[3]) / float(point.izt2))
    return [
        Warning(
            "clamp_design_point",
            "error",
            f"the zener current runs from {percent(least)} to {percent(most)} of its test "
            f"current over the triangle, outside {lo:g}..{hi:g} times it (the clamp's design "
            "point, where its voltage is specified): change R5",
        )
    ]


def buildup_check(osc: ClampedOscillator) -> list[Warning]:
    """The comparator's GBW build-up, not in the model: while the square is clamped the loop
    has no positive feedback, so the output leaves its rail as 2π·GBW·σ·t²/2 (σ the + input's
    slope, slope·R2/(R1 + R2)) and takes about √(2Δ/(2π·GBW·σ)) to cover the Δ before the
    square moves. Caution above BUILDUP_CAUTION of the period."""
    m = osc.opamp
    if math.isinf(m.gbw_hz):
        return []
    p = osc.prediction()
    vh, _ = square_levels(osc.rails, m)
    net = Clamp.of(osc.point())
    margin = vh - float(net.drive_of(np.asarray(float(p.square_high_v)), np.asarray(0.0)))
    sigma = float(p.slope_v_per_s) * osc.r2 / (osc.r1 + osc.r2)
    build = math.sqrt(2.0 * max(margin, 0.0) / (2.0 * math.pi * m.gbw_hz * sigma))
    share = 4.0 * build / float(p.period_s)  # about twice per edge, two edges
    if share <= BUILDUP_CAUTION:
        return []
    return [
        Warning(
            "comparator_buildup",
            "caution",
            f"the comparator's gain-bandwidth build-up (about {volts(build, 's')} per edge, "
            f"{percent(share)} of the period) is not in this model: use a faster op amp, or "
            "expect the frequency lower by about that share",
        )
    ]
