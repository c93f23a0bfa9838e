"""The circuit model against ngspice transient runs (reference: ngspice, Debian package).

Every netlist is generated from the parts under test (tests/ngspice_harness.py); the runs go
concurrently in one module-scoped fixture. Each test prints its measured model-vs-ngspice
errors (``pytest -s`` shows them) and records them as user properties.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import pytest

from ngspice_harness import NgspiceError, parse_measurements, require_ngspice, simulate_many
from tristock.circuits.opamp_schmitt.netlist import SimCase, case_from
from tristock.circuits.opamp_schmitt.physics import Oscillator, predict
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.circuits.topology import Prediction

pytestmark = pytest.mark.ngspice


@dataclass(frozen=True)
class Run:
    osc: Oscillator
    case: SimCase


def _run(osc: Oscillator, comparator: str, **extra: float) -> Run:
    """A SimCase built from the oscillator's own values, rails and op-amp model."""
    return Run(osc, case_from(osc, comparator, **extra))


def _ideal_amp(swing_pos: float, swing_neg: float, **kw: float) -> OpAmpModel:
    return OpAmpModel(swing_pos, swing_neg, math.inf, math.inf, 0.0, math.inf, **kw)


def _opamp(
    swing: tuple[float, float], slew: float, delay: float, gbw: float, **kw: float
) -> OpAmpModel:
    return OpAmpModel(swing[0], swing[1], slew, slew, delay, gbw, **kw)


RUNS: dict[str, Run] = {
    # split ±12 V, equal headroom: the textbook case
    "ideal": _run(
        Oscillator(12e3, 33e3, 15e3, 4.7e-9, _ideal_amp(1.0, 1.0), Rails(12.0, -12.0)), "ideal"
    ),
    # unequal rails and headroom: VH = 13.5 V, VL = 11 V
    "asymmetric": _run(
        Oscillator(8.2e3, 22e3, 12e3, 6.8e-9, _ideal_amp(1.5, 1.0), Rails(15.0, -12.0)), "ideal"
    ),
    # single 10 V supply, mid-rail reference, rail-to-rail-ish output: VH = 4.2 V, VL = 4.7 V
    "single_supply": _run(
        Oscillator(10e3, 22e3, 22e3, 2.2e-9, _ideal_amp(0.8, 0.3), Rails(10.0, 0.0)), "ideal"
    ),
    # comparator with 2 µs delay and unequal slew (2 V/µs up, 3 V/µs down), asymmetric swing
    "slew_delay": _run(
        Oscillator(
            10e3,
            27e3,
            10e3,
            10e-9,
            OpAmpModel(0.5, 1.5, 2e6, 3e6, 2e-6, math.inf),
            Rails(12.0, -12.0),
        ),
        "slew",
    ),
    # integrator offset and bias (Ve = 0.25 V + 10 µA·20 kΩ = 0.45 V), comparator offset/bias
    "offset_bias": _run(
        Oscillator(
            10e3,
            30e3,
            20e3,
            3.3e-9,
            _ideal_amp(
                1.0,
                1.0,
                offset_v=0.25,
                bias_a=10e-6,
                comparator_offset_v=0.1,
                comparator_bias_a=5e-6,
            ),
            Rails(12.0, -12.0),
        ),
        "ideal",
    ),
    # finite GBW (1.5 MHz) and slew (4 V/µs), a gm-stage macromodel in both channels
    "gbw_macro": _run(
        Oscillator(
            10e3,
            27e3,
            10e3,
            10e-9,
            OpAmpModel(0.0, 0.0, 4e6, 4e6, 0.0, 1.5e6),
            Rails(12.0, -12.0),
        ),
        "macro",
    ),
    # both channels single-pole: GBW 1 MHz, 2 V/µs, ±5 V rails, near 20 kHz (timing 22 %)
    "gbw_1M_20k": _run(
        Oscillator(10e3, 22e3, 4.7e3, 4.7e-9, _opamp((1.0, 1.0), 2e6, 0.0, 1e6), Rails(5, -5)),
        "macro",
    ),
    # both channels single-pole: GBW 3 MHz, 10 V/µs, ±12 V rails, near 5 kHz
    "gbw_3M_5k": _run(
        Oscillator(10e3, 33e3, 22e3, 7.5e-9, _opamp((1.5, 1.5), 10e6, 0.0, 3e6), Rails(12, -12)),
        "macro",
    ),
    # the demo's rank 1 (GA-JF2: 3 MHz, 13 V/µs, 1.2 µs delay, 3 mV offsets; R1F-10K7,
    # R0B-38K3, R1F-51K1, CPPG-6N80): a delay line ahead of the gm stage, both channels finite
    "demo_rank1": _run(
        Oscillator(
            10.7e3,
            38.3e3,
            51.1e3,
            6.8e-9,
            _opamp(
                (1.5, 1.5),
                13e6,
                1.2e-6,
                3e6,
                offset_v=3e-3,
                bias_a=3e-11,
                comparator_offset_v=3e-3,
                comparator_bias_a=3e-11,
            ),
            Rails(12.0, -12.0),
        ),
        "macro",
    ),
    # single 10 V supply, own 4 V reference (VH = 5.7 V, VL = 3.7 V), GBW 2 MHz, 4 V/µs,
    # 0.5 µs delay, offsets and 50 nA bias in both channels
    "gbw_asymmetric": _run(
        Oscillator(
            8.2e3,
            22e3,
            15e3,
            6.8e-9,
            _opamp(
                (0.3, 0.3),
                4e6,
                0.5e-6,
                2e6,
                offset_v=2e-3,
                bias_a=50e-9,
                comparator_offset_v=1e-3,
                comparator_bias_a=50e-9,
            ),
            Rails(10.0, 0.0, v_ref=4.0),
        ),
        "macro",
    ),
}

#: Integrator alone single-pole (1 MHz, linear), near-ideal comparator, about 24 kHz.
INTEGRATOR_ONLY = Oscillator(10e3, 22e3, 4.7e3, 4.7e-9, _ideal_amp(1.0, 1.0), Rails(5, -5))
INTEGRATOR_GBW_HZ = 1e6


@pytest.fixture(scope="module")
def measured() -> dict[str, dict[str, float] | NgspiceError]:
    require_ngspice()
    cases = {name: run.case for name, run in RUNS.items()}
    cases["integrator_only"] = case_from(
        INTEGRATOR_ONLY, "ideal", integrator_gbw_hz=INTEGRATOR_GBW_HZ
    )
    return simulate_many(cases)


def _prediction(name: str) -> Prediction:
    if name == "integrator_only":
        osc = INTEGRATOR_ONLY
        vh, vl = square_levels(osc.rails, osc.opamp)
        return predict(osc.r1, osc.r2, osc.r3, osc.c1, vh, vl, integrator_gbw=INTEGRATOR_GBW_HZ)
    return RUNS[name].osc.prediction()


def _errors(
    name: str,
    measured: dict[str, dict[str, float] | NgspiceError],
    record: Callable[[str, object], None],
) -> tuple[dict[str, float], dict[str, float]]:
    got = measured[name]
    if isinstance(got, NgspiceError):
        pytest.fail(f"ngspice run {name!r} failed: {got}")
    p = _prediction(name)
    err = {
        "period_rel": (float(p.period_s) - got["per"]) / got["per"],
        "duty_abs": float(p.duty_high) - got["duty"],
        "vpp_rel": (float(p.amplitude_vpp) - got["vtpp"]) / got["vtpp"],
        "peak_high_v": float(p.peak_high_v) - got["vtmax"],
        "peak_low_v": float(p.peak_low_v) - got["vtmin"],
        "midpoint_v": float(p.offset_v) - got["vtmid"],
    }
    print(f"\n{name}: model - ngspice: " + ", ".join(f"{k} {v:+.2e}" for k, v in err.items()))
    for key, value in err.items():
        record(f"{name}_{key}", value)
    return got, err


def test_ideal_symmetric(measured, record_property) -> None:
    got, err = _errors("ideal", measured, record_property)
    assert abs(err["period_rel"]) < 2e-3
    assert abs(got["duty"] - 0.5) < 2e-3
    assert abs(err["vpp_rel"]) < 2e-3
    assert abs(got["vtmid"]) < 0.01


def test_asymmetric_swing(measured, record_property) -> None:
    _got, err = _errors("asymmetric", measured, record_property)
    assert abs(err["period_rel"]) < 2e-3
    assert abs(err["duty_abs"]) < 2e-3
    assert abs(err["vpp_rel"]) < 2e-3
    assert abs(err["midpoint_v"]) < 0.01


def test_single_supply_reference(measured, record_property) -> None:
    _got, err = _errors("single_supply", measured, record_property)
    assert abs(err["period_rel"]) < 2e-3
    assert abs(err["duty_abs"]) < 2e-3
    assert abs(err["vpp_rel"]) < 2e-3
    assert abs(err["midpoint_v"]) < 0.01


def test_slew_and_delay(measured, record_property) -> None:
    _got, err = _errors("slew_delay", measured, record_property)
    assert abs(err["period_rel"]) < 1e-2
    assert abs(err["duty_abs"]) < 5e-3
    assert abs(err["vpp_rel"]) < 1e-2
    assert abs(err["peak_high_v"]) < 0.02
    assert abs(err["peak_low_v"]) < 0.02


def test_integrator_offset_and_bias(measured, record_property) -> None:
    got, err = _errors("offset_bias", measured, record_property)
    assert abs(err["period_rel"]) < 2e-3
    assert abs(err["duty_abs"]) < 2e-3
    assert abs(err["vpp_rel"]) < 2e-3
    # the midpoint moves by (1 + k)·(Vos2 + Ib2·(R1 ∥ R2)) = 0.183 V; the opposite sign of the
    # bias term would predict 0.083 V, 0.1 V away
    assert abs(err["midpoint_v"]) < 0.01
    assert got["vtmid"] > 0.15


def test_gbw_macromodel(measured, record_property) -> None:
    _got, err = _errors("gbw_macro", measured, record_property)
    assert abs(err["period_rel"]) < 1e-2
    assert abs(err["duty_abs"]) < 2e-3
    assert abs(err["vpp_rel"]) < 2e-2


#: Model against single-pole macromodels in both channels (issue target: 0.3 %).
GBW_REL = 3e-3


@pytest.mark.parametrize(
    "name", ["gbw_1M_20k", "gbw_3M_5k", "demo_rank1", "gbw_asymmetric", "integrator_only"]
)
def test_finite_gbw_in_both_channels(name, measured, record_property) -> None:
    got, err = _errors(name, measured, record_property)
    assert abs(err["period_rel"]) < GBW_REL
    assert abs(err["vpp_rel"]) < GBW_REL
    assert abs(err["duty_abs"]) < 2e-3
    assert abs(err["midpoint_v"]) < 0.01
    # the corrections matter: the same loop with both GBW terms left out is off by more
    osc = RUNS[name].osc if name in RUNS else INTEGRATOR_ONLY
    vh, vl = square_levels(osc.rails, osc.opamp)
    m = osc.opamp
    plain = predict(
        osc.r1, osc.r2, osc.r3, osc.c1, vh, vl, slew_rise=m.slew_rise_v_per_s,
        slew_fall=m.slew_fall_v_per_s, delay=m.delay_s, vos1=m.offset_v, ib1=m.bias_a,
        vos2=m.comparator_offset_v, ib2=m.comparator_bias_a,
    )  # fmt: skip
    assert abs(float(plain.period_s) / got["per"] - 1.0) > 3 * abs(err["period_rel"])


def test_finite_gbw_demo_rank1_in_hertz(measured) -> None:
    # the figures: the delay-and-GBW prediction was 2499.6 Hz against a macromodel's
    # 2451.7 Hz (a soft rail clamp that let the output sag ~10 mV before each edge; the
    # harness's clamp is sharp, which moves the macromodel to about 2450.5 Hz)
    got = measured["demo_rank1"]
    if isinstance(got, NgspiceError):
        pytest.fail(f"ngspice run failed: {got}")
    f = float(RUNS["demo_rank1"].osc.prediction().frequency_hz)
    assert 1.0 / got["per"] == pytest.approx(2450.5, rel=2e-3)
    assert f == pytest.approx(1.0 / got["per"], rel=GBW_REL)


def test_harness_skips_locally_and_fails_in_ci_without_ngspice(monkeypatch) -> None:
    import ngspice_harness

    monkeypatch.setattr(ngspice_harness.shutil, "which", lambda name: None)
    monkeypatch.delenv("CI", raising=False)
    with pytest.raises(pytest.skip.Exception):
        require_ngspice()
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception):
        require_ngspice()


def test_harness_reads_meas_lines() -> None:
    log = "\n".join(
        [
            "  Measurements for Transient Analysis",
            "per                 =  1.48485e-04",
            "vtmax               =  3.703715e+00 at=  1.748151e-03",
            "Total analysis time (seconds) = 4.728",
        ]
    )
    got = parse_measurements(log)
    assert got["per"] == 1.48485e-4
    assert got["vtmax"] == 3.703715
