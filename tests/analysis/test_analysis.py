"""Tests for tristock.analysis: worst case, Monte Carlo yield, sensitivities, drift.

All parts are invented test rows (stock codes RT-/CT-/UT-), built directly from parts.py.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import pytest
from scipy import stats

from tristock.analysis.bundle import analyse
from tristock.analysis.montecarlo import monte_carlo, wilson_interval
from tristock.analysis.sensitivity import sensitivities, temperature_drift
from tristock.analysis.worstcase import worst_case
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, OpAmp, Resistor

INF = math.inf


def resistor(code: str, value: float, tol: float = 0.0, tc: float = 0.0) -> Resistor:
    return Resistor(code, value, tol, tc, "E96", 0.25, "0603", 0.01, 1000)


def capacitor(
    value: float,
    tol: float = 0.0,
    tc: float | None = 0.0,
    dielectric: str = "C0G",
    band: float | None = None,
) -> Capacitor:
    return Capacitor("CT-1", value, dielectric, tol, tc, band, 50.0, "0805", 0.05, 1000)


def opamp(**kw: float) -> OpAmp:
    """An ideal op amp unless overridden: 1 V headroom, no slew limit, delay, offset or bias."""
    row: dict[str, float] = {
        "swing_pos_v": 1.0,
        "swing_neg_v": 1.0,
        "slew_v_per_us": INF,
        "gbw_hz": INF,
        "delay_s": 0.0,
        "offset_v": 0.0,
        "bias_a": 0.0,
    }
    row.update(kw)
    return OpAmp("UT-1", 2, 3.0, 40.0, output_a=0.02, unit_cost=0.5, stock=100, **row)


def real_opamp(**kw: float) -> OpAmp:
    """A realistic non-ideal op amp (invented numbers)."""
    row = {
        "swing_pos_v": 1.2,
        "swing_neg_v": 1.0,
        "slew_v_per_us": 10.0,
        "gbw_hz": 5e6,
        "delay_s": 200e-9,
        "offset_v": 2e-3,
        "bias_a": 100e-9,
    }
    row.update(kw)
    return opamp(**row)


def make_spec(
    *,
    f_target: float = 5000.0,
    f_tol: float = 10.0,
    amp: float = 11.0,
    amp_tol: float = 10.0,
    rail_tol: float = 0.0,
    t_min: float = 25.0,
    t_max: float = 25.0,
    v_pos: float = 12.0,
    v_neg: float = -12.0,
    v_ref: float | None = None,
) -> Spec:
    supply: dict[str, float] = {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": rail_tol}
    if v_ref is not None:
        supply["reference_v"] = v_ref
    return parse_spec(
        {
            "supply": supply,
            "frequency": {"target_hz": f_target, "tolerance_pct": f_tol},
            "triangle": {"amplitude_vpp": amp, "tolerance_pct": amp_tol},
            "environment": {"temp_min_c": t_min, "temp_max_c": t_max},
        }
    )


def ideal_design(
    *,
    t1: float = 0.0,
    t2: float = 0.0,
    t3: float = 0.0,
    tc_: float = 0.0,
    u1: OpAmp | None = None,
) -> Design:
    """k = R1/R2 = 0.5, R3·C1 = 100 µs: with ±12 V and 1 V headroom, f = 5 kHz, 11 Vpp."""
    return Design(
        u1 or opamp(),
        resistor("RT-1", 10e3, t1),
        resistor("RT-2", 20e3, t2),
        resistor("RT-3", 10e3, t3),
        capacitor(10e-9, tc_),
    )


def real_design(c1: Capacitor | None = None) -> Design:
    return Design(
        real_opamp(),
        resistor("RT-1", 10e3, 1.0, 100.0),
        resistor("RT-2", 20e3, 1.0, 100.0),
        resistor("RT-3", 10e3, 1.0, 50.0),
        c1 or capacitor(10e-9, 5.0, 30.0),
    )


REAL_SPEC = make_spec(f_target=4850.0, rail_tol=5.0, t_min=-40.0, t_max=85.0)


# --------------------------------------------------------------------------------------------
# Monte Carlo yield against analytic values


def _r3_only_band(spec: Spec, f0: float, tol: float) -> tuple[float, float]:
    """f = f0/(1 + δ) with δ the R3 deviation: the band of δ that keeps f inside the spec."""
    ft, tf = spec.frequency.target_hz, spec.frequency.tolerance_pct / 100
    return f0 / (ft * (1 + tf)) - 1, f0 / (ft * (1 - tf)) - 1


@pytest.mark.parametrize("distribution", ["uniform", "normal"])
def test_yield_with_only_r3_toleranced_matches_the_analytic_fraction(distribution: str) -> None:
    tol = 0.05
    design = ideal_design(t3=tol * 100)
    spec = make_spec(f_target=5100.0, f_tol=3.0)
    d_lo, d_hi = _r3_only_band(spec, 5000.0, tol)
    if distribution == "uniform":
        # scipy.stats.uniform over ±tol: the share of R3's range inside the band, exact.
        law = stats.uniform(loc=-tol, scale=2 * tol)
    else:
        # scipy.stats.truncnorm: tolerance = 3 sigma, truncated at the tolerance.
        law = stats.truncnorm(-3.0, 3.0, loc=0.0, scale=tol / 3)
    expected = float(law.cdf(d_hi) - law.cdf(d_lo))
    assert 0.3 < expected < 0.9  # the band cuts the distribution on both sides

    result = monte_carlo(design, spec, samples=20000, seed=1, distribution=distribution)  # type: ignore[arg-type]
    lo, hi = result.confidence_interval
    assert lo <= expected <= hi
    # scipy.stats.binom: the estimate lies inside the 99.9 % binomial band around the truth.
    k_lo, k_hi = stats.binom.interval(0.999, result.samples, expected)
    assert k_lo <= result.passed <= k_hi
    assert result.fraction == result.passed / result.samples
    assert result.distribution == distribution and result.seed == 1


def test_yield_counts_the_amplitude_band_too() -> None:
    # Only R1 has tolerance (uniform): f ∝ 1/R1 and A ∝ R1. The amplitude band (± 2 %) is the
    # tighter one; the yield is the share of R1's range that meets both (scipy.stats.uniform).
    tol = 0.05
    design = ideal_design(t1=tol * 100)
    spec = make_spec(f_tol=20.0, amp_tol=2.0)
    a_lo, a_hi = 11.0 * 0.98, 11.0 * 1.02
    law = stats.uniform(loc=-tol, scale=2 * tol)
    expected = float(law.cdf(a_hi / 11.0 - 1) - law.cdf(a_lo / 11.0 - 1))
    result = monte_carlo(design, spec, samples=20000, seed=3, distribution="uniform")
    k_lo, k_hi = stats.binom.interval(0.999, result.samples, expected)
    assert k_lo <= result.passed <= k_hi


@pytest.mark.parametrize(("passed", "samples"), [(0, 50), (7, 50), (11800, 20000), (400, 400)])
def test_wilson_interval_matches_scipy(passed: int, samples: int) -> None:
    # scipy.stats.binomtest(...).proportion_ci(method="wilson")
    ref = stats.binomtest(passed, samples).proportion_ci(confidence_level=0.95, method="wilson")
    lo, hi = wilson_interval(passed, samples, 0.95)
    assert lo == pytest.approx(ref.low, abs=1e-12)
    assert hi == pytest.approx(ref.high, abs=1e-12)


def test_monte_carlo_is_seeded_and_reports_its_spread() -> None:
    design, spec = real_design(), REAL_SPEC
    a = monte_carlo(design, spec, samples=2000, seed=7)
    b = monte_carlo(design, spec, samples=2000, seed=7)
    c = monte_carlo(design, spec, samples=2000, seed=8)
    assert a == b  # common practice: a seeded Generator repeats itself
    assert a.spread != c.spread
    for metric in ("frequency_hz", "amplitude_vpp", "duty_high"):
        s = a.spread[metric]
        assert s["min"] <= s["p1"] <= s["p50"] <= s["p99"] <= s["max"]


def test_normal_samples_are_narrower_than_uniform_ones() -> None:
    # Common practice: a 3-sigma truncated normal has sigma tol/3, a uniform tol/sqrt(3); the
    # central 98 % of f is about 1.4x wider for the uniform with four similar contributors.
    design, spec = real_design(), REAL_SPEC
    n = monte_carlo(design, spec, samples=20000, seed=2, distribution="normal").spread
    u = monte_carlo(design, spec, samples=20000, seed=2, distribution="uniform").spread
    width_n = n["frequency_hz"]["p99"] - n["frequency_hz"]["p1"]
    width_u = u["frequency_hz"]["p99"] - u["frequency_hz"]["p1"]
    assert 1.2 < width_u / width_n < 2.0


# --------------------------------------------------------------------------------------------
# Worst case


@pytest.mark.parametrize("distribution", ["uniform", "normal"])
def test_worst_case_bounds_contain_every_monte_carlo_sample(distribution: str) -> None:
    # Common practice: the worst-case envelope holds every sample of the same spread.
    design, spec = real_design(), REAL_SPEC
    wc = worst_case(design, spec)
    assert wc.method == "corners+box"
    assert len(wc.variables) == 12
    mc = monte_carlo(design, spec, samples=20000, seed=5, distribution=distribution)  # type: ignore[arg-type]
    for metric in ("frequency_hz", "amplitude_vpp", "duty_high"):
        lo, hi = getattr(wc, metric)
        assert lo * (1 - 1e-12) <= mc.spread[metric]["min"]
        assert mc.spread[metric]["max"] <= hi * (1 + 1e-12)
        assert lo < hi


def test_class_ii_capacitor_adds_its_band_and_the_local_search_finds_the_corner_optimum() -> None:
    # Common practice: for a model monotone in every variable, a local search over corners
    # reaches the same extremes as evaluating all 2^n corners.
    design = real_design(capacitor(10e-9, 10.0, None, dielectric="X7R", band=15.0))
    spec = REAL_SPEC
    searched = worst_case(design, spec)
    assert "C1.temp" in searched.variables and len(searched.variables) == 13
    assert searched.method == "local_search+box"
    full = worst_case(design, spec, max_corner_variables=13)
    assert full.method == "corners+box"
    for metric in ("frequency_hz", "amplitude_vpp", "duty_high"):
        assert getattr(searched, metric) == pytest.approx(getattr(full, metric), rel=1e-12)
    assert searched.evaluations < full.evaluations
    mc = monte_carlo(design, spec, samples=20000, seed=11, distribution="uniform")
    lo, hi = searched.frequency_hz
    assert lo * (1 - 1e-12) <= mc.spread["frequency_hz"]["min"]
    assert mc.spread["frequency_hz"]["max"] <= hi * (1 + 1e-12)


def test_worst_case_of_the_ideal_model_equals_the_analytic_corner() -> None:
    # f = R2/(4·R1·R3·C1) (Sedra & Smith, Microelectronic Circuits, from memory) and
    # A = (VH + VL)·R1/R2: the extremes are the analytic corners (common practice).
    t1, t2, t3, tc_ = 0.01, 0.02, 0.005, 0.05
    design = ideal_design(t1=t1 * 100, t2=t2 * 100, t3=t3 * 100, tc_=tc_ * 100)
    wc = worst_case(design, make_spec())
    f0, a0 = 20e3 / (4 * 10e3 * 10e3 * 10e-9), 22.0 * 0.5
    assert wc.frequency_hz[1] == pytest.approx(
        f0 * (1 + t2) / ((1 - t1) * (1 - t3) * (1 - tc_)), rel=1e-12
    )
    assert wc.frequency_hz[0] == pytest.approx(
        f0 * (1 - t2) / ((1 + t1) * (1 + t3) * (1 + tc_)), rel=1e-12
    )
    assert wc.amplitude_vpp[1] == pytest.approx(a0 * (1 + t1) / (1 - t2), rel=1e-12)
    assert wc.amplitude_vpp[0] == pytest.approx(a0 * (1 - t1) / (1 + t2), rel=1e-12)
    assert wc.duty_high == pytest.approx((0.5, 0.5), rel=1e-12)
    hi = wc.corners["frequency_hz_hi"]
    assert hi["R2"] == "20.4 kΩ (+2 %)" and hi["R1"] == "9.9 kΩ (-1 %)"
    assert hi["C1"] == "9.5 nF (-5 %)"
    assert wc.corners["amplitude_vpp_hi"]["R1"].endswith("(+1 %)")


def test_rail_tolerance_moves_amplitude_and_duty_but_not_the_ideal_top_frequency() -> None:
    # Ideal switch (DESIGN.md / textbook): A = (VH + VL)·k, duty = VL/(VH + VL),
    # f = VH·VL/(R3·C1·k·(VH + VL)²) is largest at VH = VL (common practice, AM-GM).
    tv = 0.05
    design = ideal_design(t1=1.0)
    wc = worst_case(design, make_spec(rail_tol=tv * 100))
    assert set(wc.variables) == {"R1", "V+", "V-"}
    span_hi, span_lo = 24 * (1 + tv) - 2, 24 * (1 - tv) - 2
    assert wc.amplitude_vpp == pytest.approx(
        (span_lo * 0.5 * 0.99, span_hi * 0.5 * 1.01), rel=1e-12
    )
    vh_lo, vl_hi = 12 * (1 - tv) - 1, 12 * (1 + tv) - 1
    assert wc.duty_high[1] == pytest.approx(vl_hi / (vh_lo + vl_hi), rel=1e-12)
    assert wc.duty_high[0] == pytest.approx(1 - vl_hi / (vh_lo + vl_hi), rel=1e-12)
    assert wc.frequency_hz[1] == pytest.approx(5000.0 / 0.99, rel=1e-12)


@pytest.mark.parametrize(
    ("v_pos", "v_neg", "v_ref"), [(12.0, -12.0, None), (24.0, 0.0, None), (15.0, 0.0, 6.0)]
)
def test_vectorised_corners_agree_with_the_oscillator_path(
    v_pos: float, v_neg: float, v_ref: float | None
) -> None:
    # Common practice: two routes through the same model (the vectorised corner evaluation and
    # Oscillator.prediction with the corner's op-amp model) give the same numbers.
    u1 = real_opamp(offset_v=0.0, bias_a=0.0)
    design = ideal_design(u1=u1)
    spec = make_spec(v_pos=v_pos, v_neg=v_neg, v_ref=v_ref, amp=9.0, amp_tol=40.0)
    wc = worst_case(design, spec)
    assert set(wc.variables) == {"U1.slew", "U1.delay"}
    base = design.oscillator(rails_from_supply(spec.supply), 25.0)
    m = base.opamp
    fast = replace(
        m,
        slew_rise_v_per_s=m.slew_rise_v_per_s * (1 + SLEW_SPREAD),
        slew_fall_v_per_s=m.slew_fall_v_per_s * (1 + SLEW_SPREAD),
        delay_s=m.delay_s * (1 - DELAY_SPREAD),
    )
    osc = Oscillator(base.r1, base.r2, base.r3, base.c1, fast, base.rails)
    assert wc.frequency_hz[1] == pytest.approx(osc.prediction().frequency_hz, rel=1e-12)
    # The nominal point sits strictly inside the band.
    f_nom = base.prediction().frequency_hz
    assert wc.frequency_hz[0] < f_nom < wc.frequency_hz[1]


def test_interior_frequency_maximum_in_the_integrator_error_is_found() -> None:
    # T = R3·C1·k·(VH + VL)²/((VH - Ve)(VL + Ve)) (DESIGN.md): f peaks where VH - Ve = VL + Ve,
    # at f = 1/(4·k·R3·C1) (AM-GM, common practice). Here Ve = Ib·R3 runs over 0..0.2 V (bias
    # 0..2 µA into 100 kΩ) and the peak Ve = (VH - VL)/2 = 0.11725 V lies inside: no corner.
    u1 = opamp(swing_neg_v=1.2345, bias_a=1e-6)
    design = Design(
        u1,
        resistor("RT-1", 10e3),
        resistor("RT-2", 20e3),
        resistor("RT-3", 100e3),
        capacitor(1e-9),
    )
    wc = worst_case(design, make_spec())
    assert wc.variables == ("U1.bias",)
    assert wc.frequency_hz[1] == pytest.approx(1 / (4 * 0.5 * 100e3 * 1e-9), rel=1e-12)
    vh, vl = 11.0, 12 - 1.2345
    corner_f = [(vh - ve) * (vl + ve) / (100e-6 * 0.5 * (vh + vl) ** 2) for ve in (0.0, 0.2)]
    assert wc.frequency_hz[0] == pytest.approx(min(corner_f), rel=1e-12)
    assert wc.frequency_hz[1] > max(corner_f) * (1 + 1e-6)
    assert wc.corners["frequency_hz_hi"]["U1.bias"] == "1.17 µA"


def test_tracking_resistors_give_no_amplitude_spread_over_temperature() -> None:
    # R1, R2 from one series with equal tempco: k = R1/R2 is the same at every temperature
    # (value(T) = value·(1 + tc·(T - 25 °C)), DESIGN.md), so A = (VH + VL)·k cannot move.
    design = Design(
        opamp(),
        resistor("RT-1", 10e3, 0.0, 100.0),
        resistor("RT-2", 20e3, 0.0, 100.0),
        resistor("RT-3", 10e3, 0.0, 50.0),
        capacitor(10e-9, 0.0, -30.0),
    )
    wc = worst_case(design, make_spec(t_min=-40.0, t_max=85.0))
    assert wc.variables == ("T",)
    assert wc.amplitude_vpp[0] == pytest.approx(wc.amplitude_vpp[1], rel=1e-14)
    # f ∝ 1/(R3·C1) ∝ 1/((1 + 50e-6·ΔT)(1 - 30e-6·ΔT)): extremes at the range ends.
    f_ends = [5000.0 / ((1 + 50e-6 * (t - 25)) * (1 - 30e-6 * (t - 25))) for t in (-40, 85)]
    assert wc.frequency_hz == pytest.approx((min(f_ends), max(f_ends)), rel=1e-12)
    assert wc.corners["frequency_hz_hi"]["T"] == "-40 °C"


# --------------------------------------------------------------------------------------------
# Sensitivities

SENSITIVITY_NAMES = {
    "R1",
    "R2",
    "R3",
    "C1",
    "V+",
    "V-",
    "U1.slew",
    "U1.delay",
    "U1.gbw",
    "U1.swing_pos",
    "U1.swing_neg",
    "U1.offset",
    "U1.bias",
}


def test_sensitivities_of_the_ideal_model() -> None:
    # f = R2/(4·R1·R3·C1) (Sedra & Smith, Microelectronic Circuits, from memory):
    # S(R2) = +1, S(R1) = S(R3) = S(C1) = -1. A = (VH + VL)·R1/R2: S(R1) = +1, S(R2) = -1,
    # S(V±) = |V±|/(V+ - V- - 2·headroom) (common practice: differentiate the formula).
    s = sensitivities(ideal_design(), make_spec())
    assert set(s.frequency) == SENSITIVITY_NAMES == set(s.amplitude)
    expected_f = {"R1": -1.0, "R2": 1.0, "R3": -1.0, "C1": -1.0}
    expected_a = {"R1": 1.0, "R2": -1.0, "R3": 0.0, "C1": 0.0, "V+": 12 / 22, "V-": 12 / 22}
    expected_a |= {"U1.swing_pos": -1 / 22, "U1.swing_neg": -1 / 22}
    for name in SENSITIVITY_NAMES:
        assert s.frequency[name] == pytest.approx(expected_f.get(name, 0.0), abs=1e-7), name
        assert s.amplitude[name] == pytest.approx(expected_a.get(name, 0.0), abs=1e-7), name
    # Sum rule (common practice): f is homogeneous of degree 0 in (R1, R2) and -1 in (R3, C1).
    assert s.frequency["R1"] + s.frequency["R2"] == pytest.approx(0.0, abs=1e-9)
    assert s.frequency["R3"] + s.frequency["C1"] == pytest.approx(-2.0, abs=1e-7)
    # Zero-valued parameters (offset, bias) are reported as exactly 0.
    assert s.frequency["U1.offset"] == 0.0 and s.amplitude["U1.bias"] == 0.0


def test_sensitivity_sum_rules_of_the_non_ideal_model() -> None:
    # Dimensional analysis (common practice), exact for any consistent model:
    # - R1 and R2 enter only as k = R1/R2 (and R1 ∥ R2 in a threshold shift): ΣS = 0;
    # - time: C1·λ, td·λ, SR/λ, GBW/λ give f/λ and the same amplitude;
    # - voltage: rails, headroom, offsets, bias (Ib·R is a voltage) and SR times λ give the same
    #   f and λ·A (split rails, reference 0 V).
    s = sensitivities(real_design(), REAL_SPEC)
    for y, a_scale in ((s.frequency, 0.0), (s.amplitude, 1.0)):
        assert y["R1"] + y["R2"] == pytest.approx(0.0, abs=1e-7)
        time_sum = y["C1"] + y["U1.delay"] - y["U1.slew"] - y["U1.gbw"]
        assert time_sum == pytest.approx(-1.0 if a_scale == 0.0 else 0.0, abs=1e-7)
        volt_names = ("V+", "V-", "U1.swing_pos", "U1.swing_neg", "U1.offset", "U1.bias")
        volt_sum = sum(y[n] for n in volt_names) + y["U1.slew"]
        assert volt_sum == pytest.approx(a_scale, abs=1e-7)
    # The non-idealities matter here: the rule is not met by the ideal terms alone.
    assert abs(s.frequency["U1.slew"]) > 1e-3 and abs(s.frequency["U1.delay"]) > 1e-3


def test_offset_sensitivity_matches_the_closed_form() -> None:
    # T = R3·C1·k·(VH + VL)²/((VH - Ve)(VL + Ve)) (DESIGN.md), so
    # S_f(Ve) = Ve·[1/(VL + Ve) - 1/(VH - Ve)], differentiated by hand (common practice);
    # the comparator offset moves only the thresholds, not f or A.
    vos = 5e-3
    design = ideal_design(u1=opamp(swing_neg_v=2.0, offset_v=vos))
    s = sensitivities(design, make_spec())
    vh, vl = 11.0, 10.0
    expected = vos * (1 / (vl + vos) - 1 / (vh - vos))
    assert s.frequency["U1.offset"] == pytest.approx(expected, rel=1e-4)
    assert abs(s.amplitude["U1.offset"]) < 1e-9


# --------------------------------------------------------------------------------------------
# Temperature drift


@pytest.mark.parametrize("tc_c1", [30.0, -30.0])
def test_drift_with_c0g_and_tracking_resistors(tc_c1: float) -> None:
    # C0G: 0 ± 30 ppm/°C (EIA class I, from memory). With R1, R2 tracking (equal tempco),
    # f ∝ 1/(R3·C1) drifts by -(tc_R3 + tc_C1) to first order, and A = (VH + VL)·k not at all.
    tc_r3 = 50.0
    design = Design(
        opamp(),
        resistor("RT-1", 10e3, 1.0, 100.0),
        resistor("RT-2", 20e3, 1.0, 100.0),
        resistor("RT-3", 10e3, 1.0, tc_r3),
        capacitor(10e-9, 5.0, tc_c1),
    )
    drift = temperature_drift(design, make_spec(t_min=-40.0, t_max=85.0))
    assert drift.frequency_ppm_per_c == pytest.approx(-(tc_r3 + tc_c1), abs=0.2)
    assert abs(drift.amplitude_ppm_per_c) < 1e-6
    assert (drift.temp_low_c, drift.temp_high_c) == (-40.0, 85.0)


def test_drift_without_tracking_follows_the_tempco_difference() -> None:
    # A ∝ R1/R2: unequal tempcos drift the amplitude by tc_R1 - tc_R2 and f by
    # tc_R2 - tc_R1 - tc_R3 - tc_C1, to first order (common practice).
    design = Design(
        opamp(),
        resistor("RT-1", 10e3, 1.0, 100.0),
        resistor("RT-2", 20e3, 1.0, 25.0),
        resistor("RT-3", 10e3, 1.0, 0.0),
        capacitor(10e-9, 5.0, 0.0),
    )
    drift = temperature_drift(design, make_spec(t_min=0.0, t_max=70.0))
    assert drift.amplitude_ppm_per_c == pytest.approx(75.0, abs=0.5)
    assert drift.frequency_ppm_per_c == pytest.approx(-75.0, abs=0.5)


def test_drift_at_a_single_temperature_uses_one_degree_either_side() -> None:
    design = Design(
        opamp(),
        resistor("RT-1", 10e3),
        resistor("RT-2", 20e3),
        resistor("RT-3", 10e3, 0.0, 200.0),
        capacitor(10e-9),
    )
    drift = temperature_drift(design, make_spec(t_min=40.0, t_max=40.0))
    assert (drift.temp_low_c, drift.temp_high_c) == (39.0, 41.0)
    # f ∝ 1/(1 + 200e-6·(T - 25)): the end-point slope over 39..41 °C, relative to 25 °C.
    expected = 1e6 * (1 / (1 + 200e-6 * 16) - 1 / (1 + 200e-6 * 14)) / 2
    assert drift.frequency_ppm_per_c == pytest.approx(expected, rel=1e-9)


# --------------------------------------------------------------------------------------------
# The bundle and bad input


def test_analyse_bundles_everything_as_json_ready_data() -> None:
    design, spec = real_design(), REAL_SPEC
    result = analyse(design, spec, samples=3000, seed=4)
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    nominal = design.oscillator(rails_from_supply(spec.supply), 25.0).prediction()
    for key in (
        "frequency_hz",
        "amplitude_vpp",
        "duty_high",
        "offset_v",
        "square_high_v",
        "square_low_v",
    ):
        assert data["predicted"][key] == pytest.approx(getattr(nominal, key), rel=1e-15)
    wc = data["worst_case"]
    assert set(wc) >= {"frequency_hz", "amplitude_vpp", "duty_high", "method"}
    assert wc["frequency_hz"][0] < data["predicted"]["frequency_hz"] < wc["frequency_hz"][1]
    assert data["yield_fraction"] == data["yield"]["fraction"] == result.yield_fraction
    assert data["yield"]["samples"] == 3000 and data["yield"]["distribution"] == "normal"
    assert set(data["sensitivity"]["frequency"]) == SENSITIVITY_NAMES
    assert set(data["drift"]) >= {"frequency_ppm_per_c", "amplitude_ppm_per_c"}
    with pytest.raises(AttributeError):
        result.drift.frequency_ppm_per_c = 0.0  # type: ignore[misc]


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"distribution": "gaussian"}, "distribution"),
        ({"samples": 0}, "samples"),
        ({"samples": 10.5}, "samples"),
        ({"seed": -1}, "seed"),
    ],
)
def test_monte_carlo_rejects_bad_arguments_naming_them(
    kwargs: dict[str, object], field: str
) -> None:
    with pytest.raises(ValueError, match=field):
        monte_carlo(ideal_design(), make_spec(), **kwargs)  # type: ignore[arg-type]


def test_bad_design_or_spec_is_named() -> None:
    with pytest.raises(TypeError, match="design"):
        worst_case("not a design", make_spec())  # type: ignore[arg-type]
    with pytest.raises(TypeError, match="spec"):
        sensitivities(ideal_design(), {"supply": {}})  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="max_corner_variables"):
        worst_case(ideal_design(), make_spec(), max_corner_variables=-1)
    with pytest.raises(ValueError, match="samples"):
        wilson_interval(0, 0)
