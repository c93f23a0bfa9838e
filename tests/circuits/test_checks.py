"""Design checks (tristock.circuits.checks): each code from a constructed case, and a clean case.

The margins tested (2x slew, 50 % of a rating, 2x capacitor voltage, 10 % swing headroom,
2 %/20 % of the period) are common practice; the loads and voltages come from Ohm's law on
the circuit model's own peaks.
"""

from __future__ import annotations

import dataclasses
import math

import pytest

from tristock.circuits.checks import Warning
from tristock.circuits.opamp_schmitt.checks import check, oscillation_failure
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.stock.parts import Capacitor, OpAmp, Resistor
from tristock.stock.units import format_value

AMP = OpAmpModel(
    swing_pos_v=1.0,
    swing_neg_v=1.0,
    slew_rise_v_per_s=10e6,
    slew_fall_v_per_s=10e6,
    delay_s=0.2e-6,
    gbw_hz=10e6,
    output_a=20e-3,
    supply_min_v=4.0,
    supply_max_v=36.0,
)
RAILS = Rails(12.0, -12.0)


def cap(voltage_v: float = 50.0, dielectric: str = "C0G") -> Capacitor:
    return Capacitor("CX-100N", 10e-9, dielectric, 5.0, 0.0, None, voltage_v, "0805", 0.05, 100)


def res(value: float, power_w: float = 0.125) -> Resistor:
    return Resistor(f"RX-{value:g}", value, 1.0, 50.0, "E24", power_w, "0603", 0.01, 1000)


def osc(amp: OpAmpModel = AMP, rails: Rails = RAILS, r1: float = 10e3, r2: float = 27e3,
        r3: float = 100e3) -> Oscillator:  # fmt: skip
    return Oscillator(r1, r2, r3, 10e-9, amp, rails)


def codes(ws: list[Warning]) -> dict[str, str]:
    return {w.code: w.severity for w in ws}


def the(ws: list[Warning], code: str) -> Warning:
    found = [w for w in ws if w.code == code]
    assert found, f"no {code} in {ws}"
    return found[0]


def test_clean_design_has_no_warnings() -> None:
    ws = check(
        osc(),
        capacitor=cap(),
        resistors={"R1": res(10e3), "R2": res(27e3), "R3": res(100e3)},
    )
    assert ws == []


@pytest.mark.parametrize(("slew", "severity"), [(15e3, "caution"), (6e3, "error")])
def test_slew_integrator(slew, severity) -> None:
    # triangle slope 11 V / (R3·C1 = 1 ms) = 0.011 V/µs
    amp = dataclasses.replace(AMP, slew_rise_v_per_s=slew, slew_fall_v_per_s=slew)
    w = the(check(osc(amp)), "slew_integrator")
    assert w.severity == severity
    assert "V/µs" in w.message


@pytest.mark.parametrize(("r1", "severity"), [(25.5e3, "caution"), (30e3, "error")])
def test_swing_integrator_split(r1, severity) -> None:
    # thresholds ±11 V·R1/R2 against the ±11 V swing
    ws = check(osc(r1=r1))
    w = the(ws, "swing_integrator")
    assert w.severity == severity
    assert "V" in w.message


def test_swing_integrator_single_supply_side() -> None:
    # 10 V single supply, reference at 3 V: VH = 6.5 V, VL = 2.5 V; the bottom turn at
    # -6.5 V·0.37 = -2.41 V leaves under 10 % of the 2.5 V below the reference
    amp = dataclasses.replace(AMP, swing_neg_v=0.5, swing_pos_v=0.5)
    ws = check(osc(rails=Rails(10.0, 0.0, 3.0), amp=amp))
    w = the(ws, "swing_integrator")
    assert w.severity == "caution"
    assert "bottom" in w.message and "3 V" in w.message


def test_supply_range() -> None:
    assert codes(check(osc(rails=Rails(20.0, -20.0))))["supply_range"] == "error"
    tight = OpAmp("OA-X", 2, 2.7, 5.5, 1.0, 1.0, 10.0, 10e6, 0.2e-6, 0.0, 0.0, 20e-3, 0.3, 10)
    assert codes(check(osc(), opamp_part=tight))["supply_range"] == "error"
    low = Rails(2.5, -1.0)
    w = the(check(osc(rails=low, amp=dataclasses.replace(AMP, swing_pos_v=0.1, swing_neg_v=0.1))),
            "supply_range")  # fmt: skip
    assert "3.5 V" in w.message and "4 V" in w.message


@pytest.mark.parametrize(("output_a", "severity"), [(0.8e-3, "caution"), (0.4e-3, "error")])
def test_output_loads(output_a, severity) -> None:
    # worst load (Ohm's law): 11 V/100 kΩ into C1 plus (11 V + |bottom peak|)/37 kΩ through
    # R1 + R2, about 0.52 mA with the bottom peak just past 11 V·10/27
    amp = dataclasses.replace(AMP, output_a=output_a)
    o = osc(amp)
    worst = 11.0 / 100e3 + (11.0 - float(o.prediction().peak_low_v)) / 37e3
    assert worst == pytest.approx(0.52e-3, rel=0.01)
    ws = check(o)
    assert codes(ws)["load_comparator"] == severity
    assert codes(ws)["load_integrator"] == severity
    assert format_value(worst, "A") in the(ws, "load_comparator").message


@pytest.mark.parametrize(("rating", "severity"), [(6.3, "caution"), (4.0, "error")])
def test_cap_voltage(rating, severity) -> None:
    # C1 sees the triangle peak from the virtual ground: 11 V·10/27 = 4.07 V plus overshoot
    peak = -float(osc().prediction().peak_low_v)
    assert peak == pytest.approx(4.07, rel=0.01)
    w = the(check(osc(), capacitor=cap(rating)), "cap_voltage")
    assert w.severity == severity
    assert format_value(peak, "V") in w.message


def test_cap_dielectrics() -> None:
    assert codes(check(osc(), capacitor=cap(dielectric="X7R")))["cap_class_ii"] == "caution"
    assert codes(check(osc(), capacitor=cap(dielectric="ALU")))["cap_polarised"] == "error"
    assert "cap_class_ii" not in codes(check(osc(), capacitor=cap(dielectric="PP")))


@pytest.mark.parametrize(("power_w", "severity"), [(2e-3, "caution"), (1e-3, "error")])
def test_resistor_power(power_w, severity) -> None:
    # R3 sees the full 11 V: 121 V²/100 kΩ = 1.21 mW
    w = the(check(osc(), resistors={"R3": res(100e3, power_w)}), "resistor_power")
    assert w.severity == severity
    assert "R3" in w.message and "1.21 mW" in w.message


def test_unknown_resistor_designator() -> None:
    with pytest.raises(ValueError, match="resistors"):
        check(osc(), resistors={"R9": res(1e3)})


@pytest.mark.parametrize(("slew", "severity"), [(0.5e6, "caution"), (0.03e6, "error")])
def test_transition_time(slew, severity) -> None:
    # τ = 22 V/SR: 44 µs (about 3 % of 1.57 ms), 733 µs (about 25 % of 2.96 ms)
    amp = dataclasses.replace(AMP, slew_rise_v_per_s=slew, slew_fall_v_per_s=slew)
    w = the(check(osc(amp)), "transition_time")
    assert w.severity == severity


@pytest.mark.parametrize(("gbw", "severity"), [(200e3, "caution"), (10e3, "error")])
def test_gbw_delay(gbw, severity) -> None:
    amp = dataclasses.replace(AMP, gbw_hz=gbw)
    o = osc(amp)
    w = the(check(o), "gbw_delay")
    assert w.severity == severity
    # the share is the full model's period less the same loop's with both channels' GBW infinite
    without = dataclasses.replace(o, opamp=dataclasses.replace(amp, gbw_hz=math.inf))
    added = o.period_s - without.period_s
    assert format_value(added, "s") in w.message


def test_cap_small() -> None:
    # a few pF of board and pin capacitance matter against tens of pF (common practice)
    small = Capacitor("CX-47P", 47e-12, "C0G", 5.0, 0.0, None, 50.0, "0603", 0.01, 100)
    assert codes(check(osc(), capacitor=small))["cap_small"] == "caution"
    assert "cap_small" not in codes(check(osc(), capacitor=cap()))


def test_warning_is_frozen_and_codes_are_stable() -> None:
    w = Warning("gbw_delay", "caution", "text")
    with pytest.raises(dataclasses.FrozenInstanceError):
        w.code = "other"  # type: ignore[misc]
    # no check fires on a perfect op amp with nothing attached
    ideal = OpAmpModel(1.0, 1.0, math.inf, math.inf, 0.0, math.inf)
    assert check(osc(ideal)) == []


def test_oscillation_failure_at_the_threshold_limit() -> None:
    """Thresholds VL·k and -VH·k must lie inside the integrator's swing +VH/-VL (offsets zero):
    with VH = 11 V and VL = 9 V (asymmetric headroom) the limit is k < VL/VH = 9/11, from the
    threshold formulas in circuit.predict."""
    amp = dataclasses.replace(AMP, swing_pos_v=1.0, swing_neg_v=3.0, offset_v=0.0, bias_a=0.0)
    limit = 9.0 / 11.0
    assert oscillation_failure(osc(amp, r1=27e3 * limit * 0.999)) is None
    reason = oscillation_failure(osc(amp, r1=27e3 * limit * 1.001))
    assert reason is not None and "lower threshold" in reason and "0.8182" in reason
    reason = oscillation_failure(osc(r1=270e3))  # R1/R2 = 10, symmetric ±11 V
    assert reason is not None and "upper threshold" in reason and "R1/R2 is 10" in reason


def test_input_common_mode_of_both_channels() -> None:
    # Superposition at the trigger's + input: (R2·vt + R1·vs)/(R1 + R2), widest just after a
    # switch with the triangle at its peak (Ohm's law); the integrator's inputs at the reference.
    o = osc(rails=Rails(12.0, 0.0))
    p = o.prediction()
    vh, vl, ref = float(p.square_high_v), -float(p.square_low_v), 6.0
    bottom = ref + (27e3 * float(p.peak_low_v) - 10e3 * vl) / 37e3
    top = ref + (27e3 * float(p.peak_high_v) + 10e3 * vh) / 37e3
    rail_to_rail = OpAmp("OA-R", 2, 2.7, 36, 1.0, 1.0, 10.0, 10e6, 0.2e-6, 0.0, 0.0, 20e-3, 0.3, 10)
    assert "input_common_mode" not in codes(check(o, opamp_part=rail_to_rail))
    low_limit = bottom + 0.1  # the range ends 0.1 V above the lowest input
    part = dataclasses.replace(rail_to_rail, input_cm_neg_v=low_limit, input_cm_pos_headroom_v=0.5)
    (w,) = [w for w in check(o, opamp_part=part) if w.code == "input_common_mode"]
    assert w.severity == "error" and "reverse phase" in w.message
    assert format_value(bottom, "V", digits=3) in w.message
    high_limit = 12.0 - top + 0.2  # the range ends 0.2 V below the highest input
    part = dataclasses.replace(rail_to_rail, input_cm_pos_headroom_v=high_limit)
    (w,) = [w for w in check(o, opamp_part=part) if w.code == "input_common_mode"]
    assert "above" in w.message and "trigger" in w.message
    # the integrator's inputs sit at the 6 V reference: a range ending at 5 V misses them
    part = dataclasses.replace(rail_to_rail, input_cm_pos_headroom_v=7.0)
    found = [w.message for w in check(o, opamp_part=part) if w.code == "input_common_mode"]
    assert any("integrator" in m for m in found)
