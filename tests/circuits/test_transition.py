"""The comparator's switching transition (circuits.transition) against an independent solution
of its delay differential equation with scipy.integrate.solve_ivp (method of steps: on each
interval of length D the delayed term comes from the previous interval's dense output), and
against limits derived by hand (common practice: linear slew, pure delay)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tristock.circuits.edgetable import LN_MU, growth_rate
from tristock.circuits.looptiming import loop_period, loop_timing
from tristock.circuits.transition import (
    MERGED_LOOKUP_POINTS,
    centroid_times,
    scaled_level_time,
    scaled_mean_time,
    switch_times,
)

inf = math.inf


def reference(mu: float, delay: float, level: float) -> tuple[float, float]:
    """(G(L), v(L)) of dY/dv = tanh(Y(v - D) + μ·v), Y = 0 for v <= 0, by solve_ivp.

    State (Y, P) with P' = Y; the run stops when Y reaches L; G(L) = v_L - P(v_L)/L.
    """
    tol = {"rtol": 1e-11, "atol": 1e-12, "dense_output": True}

    def reached(v: float, z: np.ndarray) -> float:
        return z[0] - level

    reached.terminal = True  # type: ignore[attr-defined]
    pieces: list = []  # (start, end, dense) of earlier intervals

    def delayed(v: float) -> float:
        u = v - delay
        if u <= 0.0:
            return 0.0
        for start, _end, dense in reversed(pieces):
            if start <= u:  # the interval holding u (rounding may put u a hair past its end)
                return float(dense(u)[0])
        raise AssertionError("no history")

    v, z = 0.0, np.array([0.0, 0.0])
    step = delay if delay > 0 else 1e3
    while True:
        sol = solve_ivp(
            lambda t, y: [math.tanh((delayed(t) if delay > 0 else y[0]) + mu * t), y[0]],
            (v, v + step),
            z,
            events=reached,
            **tol,
        )
        if sol.t_events[0].size:
            v_l = float(sol.t_events[0][0])
            return v_l - float(sol.y_events[0][0][1]) / level, v_l
        pieces.append((v, v + step, sol.sol))
        v, z = v + step, sol.y[:, -1]


POINTS = [
    # μ, D, L: off the table's grid lines, realistic corners (demo op amp near D = 5, μ = 0.01)
    (0.0083, 4.9, 3.3),
    (0.0083, 4.9, 6.6),
    (2.3e-4, 0.0, 12.0),
    (0.31, 0.7, 1.7),
    (4.1e-5, 11.0, 40.0),
    (0.05, 27.0, 9.0),
]


@pytest.mark.parametrize(("mu", "delay", "level"), POINTS)
def test_table_matches_a_direct_solution(mu: float, delay: float, level: float) -> None:
    g, v = reference(mu, delay, level)
    # documented accuracy of the interpolated table, in scaled time: 0.01 for G; 0.02 for v,
    # whose kink where v(L) = D (feedback arrives as the level is reached) the spline rounds
    assert float(scaled_mean_time(mu, delay, level)) == pytest.approx(g, abs=0.01)
    assert float(scaled_level_time(mu, delay, level)) == pytest.approx(v, abs=0.02)


def test_saturated_tail_is_exact_past_the_table() -> None:
    # past L = 200 the output slews at full rate: v(L) = L + u0, G(L) = u0 + L/2 + c2/L
    mu, delay = 0.01, 2.0
    g, v = reference(mu, delay, 400.0)
    assert float(scaled_level_time(mu, delay, 400.0)) == pytest.approx(v, abs=0.01)
    assert float(scaled_mean_time(mu, delay, 400.0)) == pytest.approx(g, abs=0.01)


def test_small_mu_shifts_the_solution_in_time() -> None:
    # below the table (μ < 1e-6) the linear regime just starts later by ln(μ0/μ)/r(D)
    delay = 3.0
    g, _ = reference(1e-7, delay, 20.0)
    assert float(scaled_mean_time(1e-7, delay, 20.0)) == pytest.approx(g, abs=0.02)


def test_growth_rate_solves_its_characteristic_equation() -> None:
    assert growth_rate(0.0) == 1.0
    for delay in (0.1, 1.0, 4.9, 60.0):
        r = growth_rate(delay)
        assert r == pytest.approx(math.exp(-r * delay), rel=1e-12)


def test_switch_times_limits() -> None:
    k = np.array(0.3)
    slope, span, drive, slew, td = np.array(3e4), np.array(21.0), np.array(10.5), 13e6, 1e-6
    args = (k, slope, span, drive, np.array(slew))
    # no GBW: a delayed linear slew (common practice): centroid = mid = td + τ/2
    ideal = switch_times(*args, np.array(inf), np.array(td))
    assert float(ideal.centroid) == pytest.approx(td + 21.0 / (2 * slew), rel=1e-15)
    assert float(ideal.mid) == float(ideal.centroid)
    assert float(ideal.overshoot) == pytest.approx(td + 10.5 / (2 * slew), rel=1e-15)
    # a finite GBW only adds time, and a very wide one tends to the linear slew
    finite = switch_times(*args, np.array(3e6), np.array(td))
    assert finite.centroid > ideal.centroid and finite.overshoot > ideal.overshoot
    wide = switch_times(*args, np.array(1e11), np.array(0.0))
    assert float(wide.centroid) == pytest.approx(21.0 / (2 * slew), rel=2e-3)
    with pytest.raises(ValueError, match="slew"):
        switch_times(k, slope, span, drive, np.array(inf), np.array(3e6), np.array(0.0))


@pytest.mark.parametrize("n", [700, MERGED_LOOKUP_POINTS + 1])
def test_switch_times_are_the_tables_definitions_to_the_bit(n: int) -> None:
    # centroid = td + G(λ·span/SR)/λ, mid = td + v(λ·span/(2·SR))/λ, overshoot =
    # td + G(λ·drive/SR)/λ with λ = β·2π·GBW, μ = slope/(k·SR) clamped at the table's top and
    # D = λ·td (the docstring), each table read on its own: however switch_times batches its
    # look-ups (both levels in one up to MERGED_LOOKUP_POINTS, one each above), every value is
    # the same to the bit, past the table's top level and below its first μ line too.
    rng = np.random.default_rng(11)
    k = rng.uniform(0.05, 2.0, n)
    slope = 10.0 ** rng.uniform(1, 7, n)
    span = rng.uniform(0.5, 30.0, n)
    drive = span * rng.uniform(0.05, 1.0, n)
    slew = 10.0 ** rng.uniform(5, 8, n)
    gbw = 10.0 ** rng.uniform(4, 8, n)
    td = rng.uniform(0.0, 2e-6, n)
    got = switch_times(k, slope, span, drive, slew, gbw, td)
    lam = k / (1.0 + k) * 2.0 * math.pi * gbw
    mu = np.minimum(slope / (k * slew), float(np.exp(LN_MU[-1])))
    d = lam * td
    whole = lam * span / slew
    assert np.array_equal(got.centroid, td + scaled_mean_time(mu, d, whole) / lam)
    assert np.array_equal(got.mid, td + scaled_level_time(mu, d, 0.5 * whole) / lam)
    assert np.array_equal(got.overshoot, td + scaled_mean_time(mu, d, lam * drive / slew) / lam)
    assert np.any(whole > 200.0) and np.any(mu < 1e-6)  # both continuations were read


@pytest.mark.parametrize("n", [1, 5, 700, MERGED_LOOKUP_POINTS + 1])
def test_centroids_alone_and_the_period_alone_are_the_full_models_to_the_bit(n: int) -> None:
    # centroid_times is switch_times' centroid, and loop_period loop_timing's period, however
    # either batches its look-ups (every value is computed on its own): ideal comparators
    # (GBW = inf, a linear slew) mixed in, past the table's top level and below its first μ.
    rng = np.random.default_rng(n)
    k = rng.uniform(0.05, 2.0, n)
    rc = 10.0 ** rng.uniform(-6, -2, n)
    span = rng.uniform(0.5, 30.0, n)
    a, b = span * rng.uniform(0.05, 0.95, (2, n))
    slew = 10.0 ** rng.uniform(5, 8, (2, n))
    gbw = 10.0 ** rng.uniform(4, 8, n)
    gbw[::4] = inf
    td = rng.uniform(0.0, 2e-6, n)
    edges = dict(slew_rise=slew[0], slew_fall=slew[1], delay=td, gbw=gbw, integrator_gbw=gbw)
    full = loop_timing(k, rc, span, a, b, **edges)
    assert np.array_equal(loop_period(k, rc, span, a, b, **edges), full.period_s)
    slope = np.array([b, a]) / rc
    got = centroid_times(k, slope, span, slew, gbw, td)
    assert np.array_equal(
        got, switch_times(k, slope, span, np.array([b, a]), slew, gbw, td).centroid
    )
    one = dict(slew_rise=1e6, slew_fall=2e6, delay=1e-7, gbw=3e6, integrator_gbw=inf)
    single = loop_timing(1.0, 1e-4, 10.0, 5.0, 5.0, **one).period_s
    assert np.array_equal(loop_period(1.0, 1e-4, 10.0, 5.0, 5.0, **one), single)
