"""The time-domain simulation against hand-derived results, recorded ngspice runs and the
closed-form model; the waveform plot's files.

Sources are named beside each check. Tolerances: the simulation solves every event exactly, so
where a closed form is exact for the same model the only difference is floating-point rounding
(about 1e-13 relative); 1e-9 is used, the simulation's own settling tolerance.
"""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from tristock.circuits.opamp_schmitt.physics import Oscillator, predict
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.report.plot import plot_waveforms
from tristock.simulate import Measured, SimulationError, SimulationResult, simulate

EXACT = 1e-9
inf = math.inf


def _osc(
    r1: float,
    r2: float,
    r3: float,
    c1: float,
    rails: Rails,
    *,
    swing: tuple[float, float] = (1.0, 1.0),
    slew: tuple[float, float] = (inf, inf),
    delay: float = 0.0,
    **errors: float,
) -> Oscillator:
    amp = OpAmpModel(swing[0], swing[1], slew[0], slew[1], delay, inf, **errors)
    return Oscillator(r1, r2, r3, c1, amp, rails)


def _levels(osc: Oscillator) -> tuple[float, float, float, float]:
    """(k, R3·C1, VH, VL) of ``osc``."""
    vh, vl = square_levels(osc.rails, osc.opamp)
    return osc.r1 / osc.r2, osc.r3 * osc.c1, vh, vl


# --- ideal switching -------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("r1", "r2", "r3", "c1"),
    [(10e3, 27e3, 10e3, 10e-9), (4.7e3, 15e3, 100e3, 1e-9), (22e3, 47e3, 3.3e3, 220e-9)],
)
def test_ideal_symmetric_period_is_textbook(r1: float, r2: float, r3: float, c1: float) -> None:
    osc = _osc(r1, r2, r3, c1, Rails(15.0, -15.0), swing=(1.5, 1.5))
    m = simulate(osc).measured
    # Sedra & Smith, Microelectronic Circuits (bistable multivibrator + integrator), from
    # memory: T = 4·R1·R3·C1/R2, 50 % duty, triangle ±VH·R1/R2, independent of the rails
    assert 1.0 / m.frequency_hz == pytest.approx(4.0 * r1 * r3 * c1 / r2, rel=EXACT)
    assert m.duty_high == pytest.approx(0.5, abs=EXACT)
    assert m.amplitude_vpp == pytest.approx(2.0 * 13.5 * r1 / r2, rel=EXACT)
    assert m.offset_v == pytest.approx(0.0, abs=EXACT)


@pytest.mark.parametrize(
    ("rails", "swing"),
    [
        (Rails(12.0, -11.0), (1.0, 1.0)),  # VH = 11, VL = 10
        (Rails(12.0, 0.0), (0.4, 2.1)),  # single supply, mid-rail: VH = 5.6, VL = 3.9
        (Rails(9.0, 0.0, v_ref=3.5), (0.2, 0.2)),  # own reference: VH = 5.3, VL = 3.3
    ],
)
def test_ideal_asymmetric_closed_forms(rails: Rails, swing: tuple[float, float]) -> None:
    osc = _osc(8.2e3, 22e3, 15e3, 4.7e-9, rails, swing=swing)
    k, rc, vh, vl = _levels(osc)
    m = simulate(osc).measured
    # DESIGN.md, asymmetric swing (common practice): T = R3·C1·k·(VH + VL)²/(VH·VL),
    # high fraction VL/(VH + VL), peak-to-peak k·(VH + VL), midpoint (VL - VH)·k/2
    assert 1.0 / m.frequency_hz == pytest.approx(rc * k * (vh + vl) ** 2 / (vh * vl), rel=EXACT)
    assert m.duty_high == pytest.approx(vl / (vh + vl), rel=EXACT)
    assert m.amplitude_vpp == pytest.approx(k * (vh + vl), rel=EXACT)
    assert m.offset_v == pytest.approx((vl - vh) * k / 2.0, abs=EXACT)
    assert m.peak_high_v == pytest.approx(k * vl, rel=EXACT)
    assert m.peak_low_v == pytest.approx(-k * vh, rel=EXACT)
    assert (m.square_high_v, m.square_low_v) == pytest.approx((vh, -vl), rel=EXACT)


def test_recorded_ngspice_reference_runs() -> None:
    # ngspice 39 runs recorded in shared/reference/NOTES.md (oscillator-ideal.cir and
    # oscillator-slew-delay.cir): RT = 10 kΩ, CT = 10 nF, RA = 10 kΩ, RB = 27 kΩ, square
    # +11/-10 V. .meas prints 6 significant digits and the runs are good to about 1e-5.
    rails, swing = Rails(12.0, -11.0), (1.0, 1.0)
    ideal = simulate(_osc(10e3, 27e3, 10e3, 10e-9, rails, swing=swing)).measured
    assert 1.0 / ideal.frequency_hz == pytest.approx(148.485e-6, rel=3e-5)
    assert ideal.duty_high == pytest.approx(0.476185, abs=3e-5)
    assert ideal.peak_high_v == pytest.approx(3.7037, abs=3e-4)
    assert ideal.peak_low_v == pytest.approx(-4.0741, abs=3e-4)
    slow = _osc(
        10e3, 27e3, 10e3, 10e-9, rails, swing=swing, slew=(2.82857e6, 2.82857e6), delay=7.42424e-6
    )
    assert 1.0 / simulate(slow).measured.frequency_hz == pytest.approx(193.131e-6, rel=3e-5)


# --- comparator delay and slew -----------------------------------------------------------------


@pytest.mark.parametrize(("delay", "slew"), [(0.0, 5e6), (2e-6, inf), (1.5e-6, 3e6), (4e-6, 1e6)])
def test_delay_and_slew_symmetric(delay: float, slew: float) -> None:
    osc = _osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, -12.0), slew=(slew, slew), delay=delay)
    k, rc, v, _ = _levels(osc)
    tau = 2.0 * v / slew
    t0 = 4.0 * k * rc
    m = simulate(osc).measured
    # DESIGN.md, non-ideal comparator (derived, checked there against ngspice 39):
    # symmetric T = T0 + 4·td + 2·τ; overshoot past each threshold slope·(td + τ/4)
    assert 1.0 / m.frequency_hz == pytest.approx(t0 + 4.0 * delay + 2.0 * tau, rel=EXACT)
    overshoot = (v / rc) * (delay + tau / 4.0)
    assert m.amplitude_vpp == pytest.approx(2.0 * k * v + 2.0 * overshoot, rel=EXACT)
    assert m.duty_high == pytest.approx(0.5, abs=EXACT)
    assert m.offset_v == pytest.approx(0.0, abs=EXACT)


@pytest.mark.parametrize(
    ("rise", "fall", "delay"), [(2e6, 4e6, 1.5e-6), (6e6, 1.5e6, 0.0), (3e6, 3.5e6, 3e-6)]
)
def test_unequal_rise_and_fall(rise: float, fall: float, delay: float) -> None:
    osc = _osc(
        10e3, 27e3, 10e3, 10e-9, Rails(12.0, 0.0), swing=(0.5, 1.5), slew=(rise, fall), delay=delay
    )
    k, rc, vh, vl = _levels(osc)
    span = vh + vl
    tau_r, tau_f = span / rise, span / fall
    t0 = rc * k * span**2 / (vh * vl)
    m = simulate(osc).measured
    # DESIGN.md, unequal rise/fall slew: T = T0 + (VH + VL)·[(td + τf/2)/VL + (td + τr/2)/VH];
    # duty at mid-swing stays VL/(VH + VL); overshoot top (VL/(R3·C1))·(td + VL/(2·SR_rise)),
    # bottom (VH/(R3·C1))·(td + VH/(2·SR_fall)) (the top turn ends in a rising transition)
    period = t0 + span * ((delay + tau_f / 2.0) / vl + (delay + tau_r / 2.0) / vh)
    assert 1.0 / m.frequency_hz == pytest.approx(period, rel=EXACT)
    assert m.duty_high == pytest.approx(vl / span, rel=EXACT)
    assert m.peak_high_v == pytest.approx(k * vl + (vl / rc) * (delay + vl / (2 * rise)), rel=EXACT)
    assert m.peak_low_v == pytest.approx(-k * vh - (vh / rc) * (delay + vh / (2 * fall)), rel=EXACT)


def test_integrator_slew_limited() -> None:
    # Both channels share one slew rate SR = 2 V/µs; the integrator's free slope V/(R3·C1) =
    # 2.5 V/µs is above it, so the triangle ramps at SR. Derived here (common practice: a linear
    # ramp through a symmetric rate clamp integrates like a step at its midpoint): the loop
    # behaves as an ideal switch late by d = td + τ/2 driving a ramp of slope SR, so
    # T = 4·k·V/SR + 4·d; the overshoot is SR·(td + s1) + SR·(τ/2 - s1)/2 where
    # s1 = (τ/2)·(1 - SR·R3·C1/V) is how long the clamp still holds once the transition starts.
    sr, delay = 2e6, 0.2e-6
    osc = _osc(2e3, 10e3, 4.4e3, 1e-9, Rails(12.0, -12.0), slew=(sr, sr), delay=delay)
    k, rc, v, _ = _levels(osc)
    assert v / rc > sr
    tau = 2.0 * v / sr
    s1 = (tau / 2.0) * (1.0 - sr * rc / v)
    m = simulate(osc).measured
    assert 1.0 / m.frequency_hz == pytest.approx(4 * k * v / sr + 4 * (delay + tau / 2), rel=EXACT)
    overshoot = sr * (delay + s1) + sr * (tau / 2.0 - s1) / 2.0
    assert m.amplitude_vpp == pytest.approx(2.0 * (k * v + overshoot), rel=EXACT)
    # the free-running closed form (no integrator clamp) would be far off: the clamp matters
    free = predict(osc.r1, osc.r2, osc.r3, osc.c1, v, v, slew_rise=sr, slew_fall=sr, delay=delay)
    assert abs(m.frequency_hz / float(free.frequency_hz) - 1.0) > 0.02
    assert abs(m.amplitude_vpp / float(free.amplitude_vpp) - 1.0) > 0.02


# --- offsets and bias currents -----------------------------------------------------------------


@pytest.mark.parametrize(("vos1", "ib1"), [(0.1, 2e-6), (-0.25, 0.0), (0.0, -1.5e-6), (0.4, 1e-6)])
def test_integrator_error_voltage_exact(vos1: float, ib1: float) -> None:
    osc = _osc(10e3, 22e3, 100e3, 1e-9, Rails(12.0, -9.0), offset_v=vos1, bias_a=ib1)
    k, rc, vh, vl = _levels(osc)
    ve = vos1 + ib1 * osc.r3
    m = simulate(osc).measured
    # DESIGN.md, integrator offset and bias (exact): Ve = Vos1 + Ib·R3,
    # T = R3·C1·k·(VH + VL)²/[(VH - Ve)(VL + Ve)], high fraction (VL + Ve)/(VH + VL);
    # amplitude and midpoint unchanged
    t = rc * k * (vh + vl) ** 2 / ((vh - ve) * (vl + ve))
    assert 1.0 / m.frequency_hz == pytest.approx(t, rel=EXACT)
    assert m.duty_high == pytest.approx((vl + ve) / (vh + vl), rel=EXACT)
    assert m.amplitude_vpp == pytest.approx(k * (vh + vl), rel=EXACT)
    assert m.offset_v == pytest.approx((vl - vh) * k / 2.0, abs=EXACT)


@pytest.mark.parametrize(("vos2", "ib2"), [(0.05, 0.0), (-0.12, 0.0), (0.0, 5e-6), (0.03, -8e-6)])
def test_comparator_offset_and_bias_shift_the_thresholds(vos2: float, ib2: float) -> None:
    rails = Rails(12.0, -12.0)
    base = simulate(_osc(20e3, 51e3, 10e3, 10e-9, rails)).measured
    osc = _osc(20e3, 51e3, 10e3, 10e-9, rails, comparator_offset_v=vos2, comparator_bias_a=ib2)
    k = osc.r1 / osc.r2
    parallel = osc.r1 * osc.r2 / (osc.r1 + osc.r2)
    m = simulate(osc).measured
    # DESIGN.md: Vos2 shifts both thresholds by (1 + k)·Vos2, period and duty unchanged. The
    # bias current term is derived here by KCL at the + input (common practice): Ib2 drawn
    # into the pin lowers v(+) by Ib2·(R1 ∥ R2), which acts like Vos2 + Ib2·(R1 ∥ R2) with Vos2
    # as the switching point of v(+) above the reference. (DESIGN.md states it as
    # "-Ib2·(R1 ∥ R2)" in its own sign convention; the ngspice run in
    # test_simulate_ngspice.py checks this sign with a current source on the pin.)
    shift = (1.0 + k) * (vos2 + ib2 * parallel)
    assert m.offset_v == pytest.approx(base.offset_v + shift, abs=EXACT)
    assert m.peak_high_v == pytest.approx(base.peak_high_v + shift, abs=EXACT)
    assert m.frequency_hz == pytest.approx(base.frequency_hz, rel=EXACT)
    assert m.duty_high == pytest.approx(base.duty_high, abs=EXACT)
    assert m.amplitude_vpp == pytest.approx(base.amplitude_vpp, rel=EXACT)


# --- loops that do not oscillate -------------------------------------------------------------


def test_thresholds_beyond_the_integrator_swing_raise() -> None:
    # k = 1.5: the comparator needs the triangle at ∓16.5 V, the integrator stops at ∓11 V
    osc = _osc(15e3, 10e3, 10e3, 10e-9, Rails(12.0, -12.0))
    with pytest.raises(SimulationError, match="does not oscillate") as info:
        simulate(osc)
    text = str(info.value)
    assert "-16.5 V" in text and "-11 V" in text and "swing" in text


def test_integrator_error_beyond_the_swing_raises() -> None:
    osc = _osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, -12.0), offset_v=11.5)
    with pytest.raises(SimulationError, match="error voltage") as info:
        simulate(osc)
    assert "11.5 V" in str(info.value)


def test_transitions_that_never_reach_mid_swing_raise() -> None:
    # k = 0.05 and a slow comparator with the reference far from mid-swing (levels +4/-17 V,
    # mid -6.5 V): the integrator turns as the square passes 0 V and the triangle re-crosses
    # its threshold before the square reaches mid-swing (ngspice shows the same in
    # test_simulate_ngspice.py)
    osc = _osc(150.0, 3e3, 3e3, 15e-9, Rails(5.0, -18.0), slew=(0.3e6, 0.3e6))
    with pytest.raises(SimulationError, match="turned back") as info:
        simulate(osc)
    assert "mid-swing level -6.5 V" in str(info.value)


@pytest.mark.parametrize(
    ("field", "kwargs"),
    [
        ("periods", {"periods": 0}),
        ("periods", {"periods": True}),
        ("max_points", {"max_points": 8}),
        ("settle_periods", {"settle_periods": -1}),
        ("periods", {"periods": 2.5}),
    ],
)
def test_bad_arguments_name_the_field(field: str, kwargs: dict[str, Any]) -> None:
    osc = _osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, -12.0))
    with pytest.raises(ValueError, match=field):
        simulate(osc, **kwargs)


# --- waveforms and JSON ------------------------------------------------------------------------


@pytest.mark.parametrize("slew", [inf, 2e6])
@pytest.mark.parametrize("max_points", [16, 300, 4000])
def test_waveform_bounded_and_true_to_the_measurement(slew: float, max_points: int) -> None:
    osc = _osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, 0.0), slew=(slew, slew), delay=1e-6)
    result = simulate(osc, periods=4, max_points=max_points)
    m = result.measured
    t, tri, sq = result.t_s, result.triangle_v, result.square_v
    assert t.size == tri.size == sq.size
    assert 2 <= t.size <= max_points
    assert np.all(np.diff(t) >= 0.0)
    assert t[0] == 0.0
    assert t[-1] == pytest.approx(4.0 / m.frequency_hz, rel=1e-12)
    ref = result.reference_v
    # samples lie on the solution: never beyond the measured extremes
    assert tri.max() <= ref + m.peak_high_v + 1e-12
    assert tri.min() >= ref + m.peak_low_v - 1e-12
    assert sq.max() <= ref + m.square_high_v + 1e-12
    assert sq.min() >= ref + m.square_low_v - 1e-12
    if max_points >= 300:
        # every corner is sampled, so the waveform's own extremes are the measured ones
        assert tri.max() == pytest.approx(ref + m.peak_high_v, abs=0.01 * m.amplitude_vpp)
        assert sq.max() == pytest.approx(ref + m.square_high_v, abs=1e-9)
    assert not t.flags.writeable


def test_infinite_slew_steps_appear_as_vertical_edges() -> None:
    result = simulate(_osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, -12.0)), periods=2)
    t, sq = result.t_s, result.square_v
    repeated = np.flatnonzero(np.diff(t) == 0.0)
    assert repeated.size >= 3  # the falls and the rise inside two periods
    assert np.all(np.abs(sq[repeated + 1] - sq[repeated]) == pytest.approx(22.0))


def test_to_dict_is_json() -> None:
    osc = _osc(10e3, 27e3, 10e3, 10e-9, Rails(12.0, -12.0), slew=(3e6, 3e6), delay=1e-6)
    result = simulate(osc, periods=3, max_points=200)
    data = json.loads(json.dumps(result.to_dict()))
    assert data["periods_measured"] == 3
    assert Measured(**{k: v for k, v in data["measured"].items() if k != "period_s"}) == (
        result.measured
    )
    assert data["t_s"] == result.t_s.tolist()
    assert len(data["triangle_v"]) == len(data["square_v"]) == result.t_s.size


# --- plot ------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def waveform() -> SimulationResult:
    osc = _osc(
        10e3, 27e3, 10e3, 10e-9, Rails(12.0, 0.0), swing=(1.0, 1.5), slew=(2e6, 1e6), delay=5e-6
    )
    return simulate(osc, periods=3)


def test_plot_png(waveform: SimulationResult, tmp_path: Path) -> None:
    out = plot_waveforms(waveform, tmp_path / "wave.png", title="single supply, slow comparator")
    assert out == tmp_path / "wave.png"
    # PNG signature (ISO/IEC 15948, PNG specification)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["wave.png"]  # no temporary left


def test_plot_svg_replaces_an_old_file(waveform: SimulationResult, tmp_path: Path) -> None:
    target = tmp_path / "wave.SVG"
    target.write_text("old")
    plot_waveforms(waveform, target)
    root = ET.fromstring(target.read_bytes())
    # SVG 1.1 (W3C): the root element is <svg> in the SVG namespace
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["wave.SVG"]


@pytest.mark.parametrize("name", ["wave.jpg", "wave", "wave.pdf"])
def test_plot_refuses_other_formats(waveform: SimulationResult, tmp_path: Path, name: str) -> None:
    with pytest.raises(ValueError, match="path"):
        plot_waveforms(waveform, tmp_path / name)
    assert list(tmp_path.iterdir()) == []


def test_plot_missing_directory(waveform: SimulationResult, tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="does not exist"):
        plot_waveforms(waveform, tmp_path / "nowhere" / "wave.png")


# --- against the closed-form model -------------------------------------------------------------


@st.composite
def valid_oscillators(draw: st.DrawFn) -> Oscillator:
    """Loops inside the closed form's stated domain: transitions short against a half period,
    the integrator neither slew-limited nor clipping, |Ve| small against the swing."""
    split = draw(st.booleans())
    if split:
        rails = Rails(draw(st.floats(5.0, 18.0)), -draw(st.floats(5.0, 18.0)))
    else:
        top = draw(st.floats(5.0, 30.0))
        rails = Rails(top, 0.0, v_ref=top * draw(st.floats(0.35, 0.65)))
    swing = (draw(st.floats(0.0, 1.5)), draw(st.floats(0.0, 1.5)))
    k = draw(st.floats(0.1, 0.6))
    r2 = draw(st.floats(5e3, 200e3))
    r3 = draw(st.floats(1e3, 1e6))
    c1 = draw(st.floats(100e-12, 1e-6))
    rc = r3 * c1
    amp0 = OpAmpModel(swing[0], swing[1], inf, inf, 0.0, inf)
    vh, vl = square_levels(rails, amp0)
    assume(min(vh, vl) > 1.0)
    t0 = rc * k * (vh + vl) ** 2 / (vh * vl)
    # transition time and delay each up to 4 % of T0; the slope must stay under the slew rate
    rise = (vh + vl) / (t0 * draw(st.floats(0.0005, 0.04)))
    fall = (vh + vl) / (t0 * draw(st.floats(0.0005, 0.04)))
    delay = t0 * draw(st.floats(0.0, 0.04))
    ve_limit = 0.1 * min(vh, vl)
    vos1 = draw(st.floats(-0.5, 0.5)) * ve_limit
    ib1 = draw(st.floats(-0.5, 0.5)) * ve_limit / r3
    vos2 = draw(st.floats(-0.05, 0.05)) * min(vh, vl) * k
    ib2 = draw(st.floats(-0.05, 0.05)) * min(vh, vl) * k * (1 + k) / (k * r2)
    amp = OpAmpModel(swing[0], swing[1], rise, fall, delay, inf, vos1, ib1, vos2, ib2)
    osc = Oscillator(k * r2, r2, r3, c1, amp, rails)
    p = predict(osc.r1, r2, r3, c1, vh, vl, slew_rise=rise, slew_fall=fall, delay=delay,
                vos1=vos1, ib1=ib1, vos2=vos2, ib2=ib2)  # fmt: skip
    assume(float(p.slope_v_per_s) < 0.9 * min(rise, fall))
    assume(float(p.peak_high_v) < 0.95 * vh and float(p.peak_low_v) > -0.95 * vl)
    return osc


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(valid_oscillators())
def test_simulation_agrees_with_the_closed_form(osc: Oscillator) -> None:
    # physics.predict with gbw = inf (the simulation has no GBW term): within its
    # stated domain the closed form is exact for this model (DESIGN.md), so the two must agree
    # to rounding; 1e-9 relative (voltages: 1e-9 of the swing) leaves rounding a wide margin
    # while every correction in these cases (delay, slew, Ve, Vos2) is at least ~1e-4.
    vh, vl = square_levels(osc.rails, osc.opamp)
    a = osc.opamp
    p = predict(
        osc.r1, osc.r2, osc.r3, osc.c1, vh, vl,
        slew_rise=a.slew_rise_v_per_s, slew_fall=a.slew_fall_v_per_s, delay=a.delay_s,
        vos1=a.offset_v, ib1=a.bias_a, vos2=a.comparator_offset_v, ib2=a.comparator_bias_a,
    )  # fmt: skip
    m = simulate(osc, periods=3, max_points=64).measured
    volts = EXACT * (vh + vl)
    assert m.frequency_hz == pytest.approx(float(p.frequency_hz), rel=EXACT)
    assert m.duty_high == pytest.approx(float(p.duty_high), abs=EXACT)
    assert m.amplitude_vpp == pytest.approx(float(p.amplitude_vpp), abs=volts)
    assert m.offset_v == pytest.approx(float(p.offset_v), abs=volts)
    assert m.peak_high_v == pytest.approx(float(p.peak_high_v), abs=volts)
    assert m.peak_low_v == pytest.approx(float(p.peak_low_v), abs=volts)
    assert m.square_high_v == pytest.approx(float(p.square_high_v), abs=volts)
    assert m.square_low_v == pytest.approx(float(p.square_low_v), abs=volts)
