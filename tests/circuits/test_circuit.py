"""The closed-form oscillator model (tristock.circuits).

Outside references, named beside each check:
- the textbook result for the op-amp integrator + non-inverting Schmitt trigger (Sedra & Smith,
  *Microelectronic Circuits*, bistable multivibrator with integrator; from memory);
- an event-driven time-domain simulation of the loop's physics written here with
  ``scipy.integrate.solve_ivp`` (KCL at the integrator and at the comparator's + input, a
  decision when the + input crosses the - input, a pure delay, a linear slew): it uses none of
  the closed forms, so it checks them, including the "exact within the model" claims;
- algebraic limits (first-order expansions) where stated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from tristock.circuits.opamp_schmitt.physics import Oscillator, gbw_effective_delay, predict
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.stock.parts import OpAmp

inf = math.inf

# --------------------------------------------------------------------------------------------
# Independent reference: event-driven simulation of the loop (scipy.integrate.solve_ivp)


@dataclass
class Measured:
    period_s: float
    duty_high: float
    peak_high_v: float
    peak_low_v: float


def event_simulation(
    r1: float,
    r2: float,
    r3: float,
    c1: float,
    vh: float,
    vl: float,
    *,
    slew_rise: float = inf,
    slew_fall: float = inf,
    delay: float = 0.0,
    vos1: float = 0.0,
    ib1: float = 0.0,
    vos2: float = 0.0,
    ib2: float = 0.0,
    integrator_gbw: float = inf,
    cycles: int = 5,
) -> Measured:
    """Simulate the loop from vt = 0, square high; measure the last full cycle.

    Integrator (+ input at Vos1, Ib1 into its - pin): with an ideal op amp
    C1·dvt/dt = -((vs - Vos1)/R3 - Ib1); with a single-pole one (ωt = 2π·integrator_gbw) the
    state adds the - input vn: dvt/dt = ωt·(Vos1 - vn), C1·d(vn - vt)/dt = (vs - vn)/R3 - Ib1.
    Comparator + input: p = (vt/R1 + vs/R2 - Ib2)·(R1 ∥ R2); it decides when p crosses Vos2,
    then after ``delay`` the square slews linearly to the other level. Mid-swing crossings give
    the period and duty; the triangle's extremes are recorded where dvt/dt = 0.
    """
    rp = r1 * r2 / (r1 + r2)
    mid = (vh - vl) / 2.0
    tol = {"rtol": 1e-11, "atol": 1e-13}
    single_pole = math.isfinite(integrator_gbw)
    wt = 2.0 * math.pi * integrator_gbw

    def rhs(rate: float):
        if not single_pole:
            return lambda t, y: [-((y[1] - vos1) / r3 - ib1) / c1, rate]

        def f(t: float, y: np.ndarray) -> list[float]:
            dvt = wt * (vos1 - y[2])
            return [dvt, rate, dvt + ((y[1] - y[2]) / r3 - ib1) / c1]

        return f

    def p_minus_vos2(t: float, y: np.ndarray) -> float:
        return (y[0] / r1 + y[1] / r2 - ib2) * rp - vos2

    t, y = 0.0, np.array([0.0, vh, vos1] if single_pole else [0.0, vh])
    rises: list[float] = []
    falls: list[float] = []
    tops: list[float] = []
    bottoms: list[float] = []
    period_guess = 4.0 * r3 * c1 * r1 / r2 * (vh + vl) ** 2 / (4 * vh * vl)
    for _ in range(2 * cycles):
        high = y[1] > mid
        # hold at the rail until the decision flips
        ev = p_minus_vos2
        ev.terminal = True  # type: ignore[attr-defined]
        ev.direction = -1.0 if high else 1.0  # type: ignore[attr-defined]
        sol = solve_ivp(rhs(0.0), (t, t + 10 * period_guess), y, events=ev, **tol)
        assert sol.status == 1, "the comparator never switched"
        t, y = float(sol.t_events[0][0]), sol.y_events[0][0]
        if delay > 0.0:
            sol = solve_ivp(rhs(0.0), (t, t + delay), y, **tol)
            t, y = float(sol.t[-1]), sol.y[:, -1]
        target = -vl if high else vh
        rate = slew_fall if high else slew_rise

        def reached(t: float, y: np.ndarray, target: float = target) -> float:
            return y[1] - target

        def at_mid(t: float, y: np.ndarray) -> float:
            return y[1] - mid

        def turning(t: float, y: np.ndarray) -> float:
            return y[2] - vos1 if single_pole else y[1] - vos1 - ib1 * r3

        reached.terminal = True  # type: ignore[attr-defined]
        if math.isinf(rate):
            (falls if high else rises).append(t)
            y = y.copy()
            y[1] = target
            if not single_pole:
                (bottoms if high else tops).append(float(y[0]))
                continue
            sol = solve_ivp(rhs(0.0), (t, t + period_guess / 4), y, events=turning, **tol)
            (bottoms if high else tops).append(float(sol.y_events[0][0][0]))
            continue
        span = abs(target - y[1]) / rate
        sol = solve_ivp(
            rhs(-rate if high else rate),
            (t, t + 2 * span),
            y,
            events=[reached, at_mid, turning],
            **tol,
        )
        (falls if high else rises).append(float(sol.t_events[1][0]))
        t, y = float(sol.t_events[0][0]), sol.y_events[0][0].copy()
        y[1] = target
        turned = sol.t_events[2]
        if turned.size:
            (bottoms if high else tops).append(float(sol.y_events[2][0][0]))
        else:  # the lagged ramp turns after the edge has ended
            sol = solve_ivp(rhs(0.0), (t, t + period_guess / 4), y, events=turning, **tol)
            (bottoms if high else tops).append(float(sol.y_events[0][0][0]))
    period = rises[-1] - rises[-2]
    fall = next(f for f in falls if f > rises[-2])
    return Measured(period, (fall - rises[-2]) / period, tops[-1], bottoms[-1])


# --------------------------------------------------------------------------------------------
# Textbook and common-practice results


@pytest.mark.parametrize(
    ("r1", "r2", "r3", "c1", "v"),
    [
        (10e3, 27e3, 10e3, 10e-9, 11.0),
        (4.7e3, 15e3, 33e3, 2.2e-9, 4.5),
        (1e3, 1.2e3, 1e6, 1e-7, 13.0),
    ],
)
def test_ideal_symmetric_frequency_and_thresholds(r1, r2, r3, c1, v) -> None:
    p = predict(r1, r2, r3, c1, v, v)
    # Sedra & Smith, Microelectronic Circuits, bistable multivibrator with integrator (from memory)
    assert p.frequency_hz == pytest.approx(r2 / (4 * r1 * r3 * c1), rel=1e-12)
    assert p.threshold_high_v == pytest.approx(v * r1 / r2, rel=1e-12)
    assert p.threshold_low_v == pytest.approx(-v * r1 / r2, rel=1e-12)
    assert p.amplitude_vpp == pytest.approx(2 * v * r1 / r2, rel=1e-12)
    # common practice: equal swings give a 50 % square
    assert p.duty_high == pytest.approx(0.5, abs=1e-12)
    assert p.offset_v == pytest.approx(0.0, abs=1e-12)


def test_ideal_symmetric_frequency_independent_of_rails() -> None:
    # Sedra & Smith (from memory): the rails cancel out of f in the symmetric case
    f = [predict(10e3, 22e3, 15e3, 4.7e-9, v, v).frequency_hz for v in (2.0, 5.0, 11.0, 14.5)]
    assert max(f) == pytest.approx(min(f), rel=1e-12)


@pytest.mark.parametrize(("vh", "vl"), [(11.0, 10.0), (13.5, 11.0), (4.2, 4.7), (3.0, 9.0)])
def test_asymmetric_closed_forms_against_event_simulation(vh, vl) -> None:
    r1, r2, r3, c1 = 8.2e3, 22e3, 12e3, 6.8e-9
    p = predict(r1, r2, r3, c1, vh, vl)
    k = r1 / r2
    # the closed forms as DESIGN.md states them
    assert p.period_s == pytest.approx(r3 * c1 * k * (vh + vl) ** 2 / (vh * vl), rel=1e-12)
    assert p.duty_high == pytest.approx(vl / (vh + vl), rel=1e-12)
    assert p.offset_v == pytest.approx((vl - vh) * k / 2, abs=1e-12)
    assert p.threshold_low_v == pytest.approx(-vh * k, rel=1e-12)
    assert p.threshold_high_v == pytest.approx(vl * k, rel=1e-12)
    # and against the event simulation (scipy solve_ivp)
    m = event_simulation(r1, r2, r3, c1, vh, vl)
    assert p.period_s == pytest.approx(m.period_s, rel=1e-8)
    assert p.duty_high == pytest.approx(m.duty_high, abs=1e-8)
    assert p.peak_high_v == pytest.approx(m.peak_high_v, abs=1e-8)
    assert p.peak_low_v == pytest.approx(m.peak_low_v, abs=1e-8)


# --------------------------------------------------------------------------------------------
# Non-ideal comparator and integrator against the event simulation (scipy solve_ivp)

NONIDEAL = [
    # name, vh, vl, slew_rise, slew_fall, delay, vos1, ib1, vos2, ib2
    ("delay only", 11.0, 10.0, inf, inf, 5e-6, 0.0, 0.0, 0.0, 0.0),
    ("slew only", 11.0, 10.0, 3e6, 3e6, 0.0, 0.0, 0.0, 0.0, 0.0),
    ("unequal slew + delay", 11.5, 10.5, 2e6, 3e6, 2e-6, 0.0, 0.0, 0.0, 0.0),
    ("integrator offset + bias", 11.0, 11.0, inf, inf, 0.0, 0.25, 10e-6, 0.0, 0.0),
    ("comparator offset + bias", 11.0, 9.0, inf, inf, 0.0, 0.0, 0.0, 0.1, 5e-6),
    ("everything", 12.0, 9.5, 2.5e6, 4e6, 1e-6, -0.3, 5e-6, 0.05, -2e-6),
]


@pytest.mark.parametrize("integrator_gbw", [inf, 1e6], ids=["ideal integrator", "1 MHz"])
@pytest.mark.parametrize("case", NONIDEAL, ids=[c[0] for c in NONIDEAL])
def test_nonideal_model_is_exact_within_its_assumptions(case, integrator_gbw) -> None:
    """Exact (to the simulation's 1e-11 tolerance) for a delayed linear slew and a single-pole
    integrator: its lag transient e^(-t/τi) is long gone (e^-300) at the next threshold."""
    _, vh, vl, sr_r, sr_f, td, vos1, ib1, vos2, ib2 = case
    r1, r2, r3, c1 = 10e3, 27e3, 10e3, 10e-9
    kw = dict(
        slew_rise=sr_r,
        slew_fall=sr_f,
        delay=td,
        vos1=vos1,
        ib1=ib1,
        vos2=vos2,
        ib2=ib2,
        integrator_gbw=integrator_gbw,
    )
    p = predict(r1, r2, r3, c1, vh, vl, **kw)
    m = event_simulation(r1, r2, r3, c1, vh, vl, **kw)
    assert p.period_s == pytest.approx(m.period_s, rel=1e-8)
    assert p.duty_high == pytest.approx(m.duty_high, abs=1e-8)
    assert p.peak_high_v == pytest.approx(m.peak_high_v, abs=1e-7)
    assert p.peak_low_v == pytest.approx(m.peak_low_v, abs=1e-7)


def test_symmetric_slew_and_delay_forms() -> None:
    # DESIGN.md symmetric forms: T = T0 + 4·td + 2·τ; overshoot slope·(td + τ/4)
    v, sr, td = 10.0, 2e6, 3e-6
    r1, r2, r3, c1 = 10e3, 20e3, 20e3, 4.7e-9
    tau = 2 * v / sr
    ideal = predict(r1, r2, r3, c1, v, v)
    p = predict(r1, r2, r3, c1, v, v, slew_rise=sr, slew_fall=sr, delay=td)
    assert p.period_s == pytest.approx(ideal.period_s + 4 * td + 2 * tau, rel=1e-12)
    slope = v / (r3 * c1)
    assert p.slope_v_per_s == pytest.approx(slope, rel=1e-12)
    assert p.peak_high_v - p.threshold_high_v == pytest.approx(slope * (td + tau / 4), rel=1e-12)
    assert p.threshold_low_v - p.peak_low_v == pytest.approx(slope * (td + tau / 4), rel=1e-12)
    assert p.effective_delay_s == pytest.approx(td + tau / 2, rel=1e-12)
    assert p.duty_high == pytest.approx(0.5, abs=1e-12)


def test_comparator_offset_moves_thresholds_only() -> None:
    r1, r2, r3, c1, vh, vl = 10e3, 30e3, 20e3, 3.3e-9, 11.0, 10.0
    base = predict(r1, r2, r3, c1, vh, vl)
    vos2, ib2 = 0.1, 5e-6
    p = predict(r1, r2, r3, c1, vh, vl, vos2=vos2, ib2=ib2)
    # the shift derived from KCL at the + input; checked in the event simulation above
    shift = (1 + r1 / r2) * (vos2 + ib2 * r1 * r2 / (r1 + r2))
    assert p.threshold_high_v - base.threshold_high_v == pytest.approx(shift, rel=1e-12)
    assert p.threshold_low_v - base.threshold_low_v == pytest.approx(shift, rel=1e-12)
    assert p.period_s == pytest.approx(base.period_s, rel=1e-12)
    assert p.duty_high == pytest.approx(base.duty_high, rel=1e-12)
    assert p.amplitude_vpp == pytest.approx(base.amplitude_vpp, rel=1e-12)


def test_comparator_gbw_enters_the_period_as_its_centroid_delay() -> None:
    """The period sees a comparator edge only through its centroid (the moment an instant step
    would act the same on the integrator), so a finite GBW acts on it exactly like the extra
    delay gbw_effective_delay reports. Amplitude and duty see other moments of the edge."""
    r1, r2, r3, c1, v, sr, gbw, td = 10e3, 27e3, 10e3, 10e-9, 12.0, 4e6, 1.5e6, 1e-6
    tg = float(gbw_effective_delay(r1, r2, r3, c1, v, 2 * v, sr, gbw, td))
    with_gbw = predict(r1, r2, r3, c1, v, v, slew_rise=sr, slew_fall=sr, gbw=gbw, delay=td)
    as_delay = predict(r1, r2, r3, c1, v, v, slew_rise=sr, slew_fall=sr, delay=td + tg)
    assert tg > 0
    assert with_gbw.period_s == pytest.approx(as_delay.period_s, rel=1e-12)
    assert float(gbw_effective_delay(r1, r2, r3, c1, v, 2 * v, sr, inf, td)) == 0.0
    # the delay lengthens the build-up (it sits inside the regenerative loop)
    assert tg > float(gbw_effective_delay(r1, r2, r3, c1, v, 2 * v, sr, gbw, 0.0))
    with pytest.raises(ValueError, match="slew"):
        predict(r1, r2, r3, c1, v, v, gbw=gbw)


def test_integrator_gbw_closed_form() -> None:
    """Ideal comparator, single-pole integrator (derived in integrator.integrator_terms, checked by
    the event simulation above): T = T0·(1 + ε) + (VH + VL)²/(VH·VL)·τi, ε = 1/(ωt·R3·C1),
    τi = 1/(ωt·(1 + ε)); duty unchanged; each peak passes its threshold by
    τi·(s_before - s_after·ln(1 + s_before/s_after)) (step into a first-order lag).
    To first order this is DESIGN.md's ΔT ≈ T0/(ωt·R3·C1) + (VH + VL)(1/VH + 1/VL)/ωt."""
    r1, r2, r3, c1, vh, vl, gbw = 10e3, 22e3, 4.7e3, 4.7e-9, 5.0, 4.0, 1e6
    wt, rc = 2 * math.pi * gbw, r3 * c1
    eps = 1 / (wt * rc)
    lag = 1 / (wt * (1 + eps))
    ideal = predict(r1, r2, r3, c1, vh, vl)
    p = predict(r1, r2, r3, c1, vh, vl, integrator_gbw=gbw)
    span2 = (vh + vl) ** 2 / (vh * vl)
    assert p.period_s == pytest.approx(ideal.period_s * (1 + eps) + span2 * lag, rel=1e-12)
    first_order = ideal.period_s / (wt * rc) + span2 / wt
    assert p.period_s - ideal.period_s == pytest.approx(first_order, rel=2 * eps)
    assert p.duty_high == pytest.approx(vl / (vh + vl), rel=1e-12)
    s_up, s_down = vl / (rc * (1 + eps)), vh / (rc * (1 + eps))
    top = lag * (s_up - s_down * math.log1p(s_up / s_down))
    assert p.peak_high_v - p.threshold_high_v == pytest.approx(top, rel=1e-9)


def test_timing_share() -> None:
    r1, r2, r3, c1, vh, vl = 10e3, 22e3, 4.7e3, 4.7e-9, 5.0, 4.0
    ideal = predict(r1, r2, r3, c1, vh, vl, vos1=0.1, ib1=1e-6)
    assert ideal.timing_share == pytest.approx(0.0, abs=1e-15)
    slow = {"slew_rise": 2e6, "slew_fall": 3e6, "delay": 1e-6, "vos1": 0.1, "ib1": 1e-6}
    p = predict(r1, r2, r3, c1, vh, vl, gbw=1e6, integrator_gbw=1e6, **slow)
    # definition: 1 - T_ideal/T, T_ideal with the same levels, offsets and bias
    assert p.timing_share == pytest.approx(1 - ideal.period_s / p.period_s, rel=1e-12)
    q = predict(r1, r2, r3, c1, vh, vl, **slow)
    assert 0 < q.timing_share < p.timing_share < 1


# --------------------------------------------------------------------------------------------
# Properties (hypothesis)

res = st.floats(1e2, 1e6)
caps = st.floats(1e-11, 1e-5)
levels = st.floats(0.5, 20.0)
scale = st.floats(0.01, 100.0)


@settings(max_examples=60, deadline=None)
@given(r1=res, r2=res, r3=res, c1=caps, vh=levels, vl=levels, s3=scale, sc=scale)
def test_frequency_scales_as_inverse_rc_and_amplitude_does_not(
    r1, r2, r3, c1, vh, vl, s3, sc
) -> None:
    # from the closed form T ∝ R3·C1 (Sedra & Smith, from memory, for the symmetric case)
    a = predict(r1, r2, r3, c1, vh, vl)
    b = predict(r1, r2, r3 * s3, c1 * sc, vh, vl)
    assert b.frequency_hz * s3 * sc == pytest.approx(a.frequency_hz, rel=1e-9)
    assert b.amplitude_vpp == pytest.approx(a.amplitude_vpp, rel=1e-12)
    assert b.duty_high == pytest.approx(a.duty_high, rel=1e-12)
    assert b.offset_v == pytest.approx(a.offset_v, rel=1e-12, abs=1e-15)


@settings(max_examples=60, deadline=None)
@given(vh=levels, vl=levels, frac=st.floats(-0.01, 0.01), r3=res, ib_share=st.floats(0.0, 1.0))
def test_exact_ve_form_reduces_to_first_order(vh, vl, frac, r3, ib_share) -> None:
    # first-order expansion of the exact form (algebra): duty moves by Ve/(VH + VL), the period
    # by Ve·(VL - VH)/(VH·VL); Ve split between offset and bias current Ve = Vos1 + Ib1·R3
    ve = frac * min(vh, vl)
    vos1, ib1 = ve * (1 - ib_share), ve * ib_share / r3
    r1, r2, c1 = 10e3, 27e3, 10e-9
    base = predict(r1, r2, r3, c1, vh, vl)
    p = predict(r1, r2, r3, c1, vh, vl, vos1=vos1, ib1=ib1)
    assert p.duty_high - base.duty_high == pytest.approx(ve / (vh + vl), rel=1e-6, abs=1e-14)
    x = ve * (vh - vl) / (vh * vl)
    y = ve**2 / (vh * vl)
    second_order = 2 * (abs(y) + (x - y) ** 2) + 1e-13
    assert abs(p.period_s / base.period_s - 1 - ve * (vl - vh) / (vh * vl)) <= second_order
    assert p.amplitude_vpp == pytest.approx(base.amplitude_vpp, rel=1e-12)
    assert p.offset_v == pytest.approx(base.offset_v, rel=1e-9, abs=1e-12)


@settings(max_examples=30, deadline=None)
@given(
    n=st.integers(1, 6),
    data=st.data(),
)
def test_vectorised_predict_equals_scalar_predict(n, data) -> None:
    def arr(strategy):
        return np.array(data.draw(st.lists(strategy, min_size=n, max_size=n)))

    args = [arr(res), arr(res), arr(res), arr(caps), arr(st.floats(5.0, 15.0)), arr(levels)]
    kw = {
        "slew_rise": arr(st.floats(1e5, 1e8)),
        "slew_fall": arr(st.floats(1e5, 1e8)),
        "delay": arr(st.floats(0.0, 1e-5)),
        "gbw": arr(st.floats(1e5, 1e8)),
        "integrator_gbw": arr(st.floats(1e5, 1e8)),
        "vos1": arr(st.floats(-0.4, 0.4)),
        "ib1": arr(st.floats(-1e-7, 1e-7)),
        "vos2": arr(st.floats(-0.01, 0.01)),
        "ib2": 1e-9,  # a scalar broadcast against the arrays
    }
    vec = predict(*args, **kw)
    for i in range(n):
        one = predict(
            *(float(a[i]) for a in args),
            **{k: (float(v[i]) if isinstance(v, np.ndarray) else v) for k, v in kw.items()},
        )
        for name, value in one._asdict().items():
            assert isinstance(value, float)
            assert getattr(vec, name)[i] == pytest.approx(value, rel=1e-12, abs=1e-18)


# --------------------------------------------------------------------------------------------
# Rails, op-amp model, Oscillator


def test_rails_reference() -> None:
    assert Rails(12.0, -12.0).reference_v == 0.0
    assert Rails(15.0, -5.0).reference_v == 0.0
    assert Rails(10.0, 0.0).reference_v == 5.0
    assert Rails(10.0, 0.0, 4.0).reference_v == 4.0
    assert Rails(10.0, 0.0).span_v == 10.0
    assert Rails(12.0, -12.0).span_v == 24.0


@pytest.mark.parametrize(
    ("args", "field"),
    [
        ((5.0, 5.0), "v_pos"),
        ((10.0, 0.0, 12.0), "v_ref"),
        ((inf, 0.0), "v_pos"),
        ((5.0, 0.0, 0.0), "v_ref"),
    ],
)
def test_rails_reject_bad_input(args, field) -> None:
    with pytest.raises(ValueError, match=field):
        Rails(*args)


def test_square_levels_split_and_single_supply() -> None:
    amp = OpAmpModel(1.5, 0.5, 1e6, 1e6, 0.0, 1e6)
    assert square_levels(Rails(15.0, -12.0), amp) == pytest.approx((13.5, 11.5))
    assert square_levels(Rails(10.0, 0.0), amp) == pytest.approx((3.5, 4.5))
    assert square_levels(Rails(10.0, 0.0, 3.0), amp) == pytest.approx((5.5, 2.5))
    with pytest.raises(ValueError, match="swing_neg_v"):
        square_levels(Rails(10.0, 0.0, 0.4), amp)


@pytest.mark.parametrize(
    ("name", "value"),
    [("r1", -1.0), ("r3", 0.0), ("c1", inf), ("vl", 0.0), ("slew_fall", 0.0), ("delay", -1e-9)],
)
def test_predict_names_the_bad_field(name, value) -> None:
    args = {"r1": 1e4, "r2": 2e4, "r3": 1e4, "c1": 1e-8, "vh": 10.0, "vl": 10.0}
    kw: dict[str, float] = {}
    (args if name in args else kw)[name] = value
    with pytest.raises(ValueError, match=name):
        predict(**args, **kw)


def test_predict_rejects_error_voltage_beyond_the_square() -> None:
    with pytest.raises(ValueError, match="vos1"):
        predict(1e4, 2e4, 1e4, 1e-8, 5.0, 5.0, vos1=4.0, ib1=1e-4)


def test_opamp_model_from_part_and_oscillator() -> None:
    part = OpAmp(
        id="OA-DEMO-7",
        channels=2,
        supply_min_v=4.0,
        supply_max_v=36.0,
        swing_pos_v=1.2,
        swing_neg_v=0.8,
        slew_v_per_us=9.0,
        gbw_hz=4e6,
        delay_s=0.6e-6,
        offset_v=1e-3,
        bias_a=20e-9,
        output_a=25e-3,
        unit_cost=0.4,
        stock=100,
    )
    m = OpAmpModel.from_part(part)
    assert m.slew_rise_v_per_s == m.slew_fall_v_per_s == pytest.approx(9e6)
    assert (m.offset_v, m.bias_a, m.comparator_offset_v, m.comparator_bias_a) == (
        1e-3,
        20e-9,
        1e-3,
        20e-9,
    )
    assert (m.output_a, m.supply_min_v, m.supply_max_v, m.delay_s) == (25e-3, 4.0, 36.0, 0.6e-6)

    osc = Oscillator(r1=10e3, r2=27e3, r3=10e3, c1=10e-9, opamp=m, rails=Rails(12.0, -12.0))
    vh, vl = square_levels(osc.rails, m)
    p = predict(
        10e3, 27e3, 10e3, 10e-9, vh, vl, slew_rise=9e6, slew_fall=9e6, delay=0.6e-6, gbw=4e6,
        vos1=1e-3, ib1=20e-9, vos2=1e-3, ib2=20e-9, integrator_gbw=4e6,
    )  # fmt: skip
    assert osc.prediction() == p  # the part's GBW goes to both channels
    assert osc.frequency_hz == p.frequency_hz
    assert osc.period_s == p.period_s
    assert osc.duty_high == p.duty_high
    assert osc.amplitude_vpp == p.amplitude_vpp
    assert osc.offset_v == p.offset_v
    assert (osc.square_high_v, osc.square_low_v) == (vh, -vl)
    assert osc.k == pytest.approx(10 / 27)
    assert osc.ideal_frequency_hz == pytest.approx(
        1 / (10e3 * 10e-9 * (10 / 27) * (vh + vl) ** 2 / (vh * vl))
    )
    assert osc.ideal_frequency_hz > osc.frequency_hz


def test_oscillator_report() -> None:
    amp = OpAmpModel(1.0, 1.0, 5e6, 5e6, 1e-6, 2e6)
    osc = Oscillator(10e3, 27e3, 10e3, 10e-9, amp, Rails(12.0, -12.0))
    text = str(osc)
    for piece in ("R1 10 kΩ", "R2 27 kΩ", "C1 10 nF", "+11 V", "-11 V", "Hz", "µs", "50.00 %"):
        assert piece in text
    assert "Hz" in repr(osc) and "\n" not in repr(osc)
    with pytest.raises(ValueError, match="c1"):
        Oscillator(10e3, 27e3, 10e3, -1.0, amp, Rails(12.0, -12.0))
    with pytest.raises(ValueError, match="slew_rise_v_per_s"):
        OpAmpModel(1.0, 1.0, 0.0, 5e6, 1e-6, 2e6)
