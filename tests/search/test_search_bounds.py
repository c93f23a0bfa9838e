"""The bounds that make the search exact under the full model (tristock.search.bounds).

Outside references, named beside each check:
- the full closed-form model ``physics.predict`` (checked against ngspice in
  test_circuit_ngspice.py): ``loop_timing`` must equal it wherever a + b = VH + VL, and every
  bound must hold for its values at random points (brute force over the model);
- the inequality ln(1 + x) > 2x/(2 + x) for x > 0 (a standard bound, from memory), on which
  the monotonicity of g(ρ)/ρ rests: checked numerically on a dense grid here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tristock.circuits.edgetable import LN_LEVEL, LN_MU, Q_DELAY
from tristock.circuits.looptiming import loop_timing
from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.searchform import StageLoop
from tristock.circuits.transition import scaled_mean_time
from tristock.search.bounds import (
    EDGE_LEVEL_MIN,
    amplitude_bounds,
    claimed,
    overshoot_fraction_cap,
    p_ceiling,
    p_floor,
    period_bounds,
    point_bounds,
    range_bounds,
    share_p_floor,
    timing_share_floor,
    window,
)

RNG_POINTS = 4000


def random_loops(rng: np.random.Generator, n: int) -> tuple[StageLoop, dict[str, np.ndarray]]:
    """n op amps on random rails: levels 0.5..20 V, slew 0.02..1000 V/µs (some infinite),
    delay 0..20 µs, GBW 30 kHz..1 GHz (some infinite), Ve ranges inside ±20 % of a level."""
    vh = rng.uniform(0.5, 20, n)
    vl = rng.uniform(0.5, 20, n)
    slew = 10 ** rng.uniform(4.3, 9, n)
    slew = np.where(rng.random(n) < 0.1, np.inf, slew)
    fall = np.where(np.isinf(slew), np.inf, slew * rng.uniform(0.5, 2, n))
    delay = np.where(rng.random(n) < 0.2, 0.0, 10 ** rng.uniform(-9, -4.7, n))
    gbw = 10 ** rng.uniform(4.5, 9, n)
    gbw = np.where(np.isinf(slew) | (rng.random(n) < 0.1), np.inf, gbw)
    igbw = np.where(rng.random(n) < 0.2, np.inf, 10 ** rng.uniform(4.5, 9, n))
    lim = 0.2 * np.minimum(vh, vl)
    ve_a = rng.uniform(-lim, lim)
    ve_b = rng.uniform(-lim, lim)
    loop = StageLoop(
        vh, vh, vl, vl, slew, fall, delay, gbw, igbw, np.minimum(ve_a, ve_b), np.maximum(ve_a, ve_b)
    )
    return loop, {"k": 10 ** rng.uniform(-2, -0.01, n), "p": 10 ** rng.uniform(-9, -0.5, n)}


def with_level_intervals(rng: np.random.Generator, loop: StageLoop) -> StageLoop:
    """The same loops with each level an interval [V, V·(1 + w)], w up to 0.5 (levels that
    depend on the row, as with a pull-up or a zener clamp)."""
    n = len(loop.vh_lo)
    return loop._replace(
        vh_hi=loop.vh_lo * (1 + rng.uniform(0, 0.5, n)),
        vl_hi=loop.vl_lo * (1 + rng.uniform(0, 0.5, n)),
    )


def levels_inside(rng: np.random.Generator, loop: StageLoop) -> tuple[np.ndarray, np.ndarray]:
    """Random levels (VH, VL) inside the loops' intervals, ends included now and then."""
    n = len(loop.vh_lo)
    u = np.where(rng.random((2, n)) < 0.2, rng.integers(0, 2, (2, n)), rng.random((2, n)))
    vh = loop.vh_lo + u[0] * (loop.vh_hi - loop.vh_lo)
    vl = loop.vl_lo + u[1] * (loop.vl_hi - loop.vl_lo)
    return vh, vl


def full(
    loop: StageLoop,
    k: np.ndarray,
    p: np.ndarray,
    ve: np.ndarray,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
):
    """predict at R2 = 10 kΩ, R1 = k·R2, R3 = 10 kΩ, C1 = P/(k·R3), Vos1 = Ve, at the
    loop's lower levels or at ``levels``."""
    vh, vl = levels if levels is not None else (loop.vh_lo, loop.vl_lo)
    return predict(
        k * 1e4,
        1e4,
        1e4,
        p / (k * 1e4),
        vh,
        vl,
        slew_rise=loop.slew_rise,
        slew_fall=loop.slew_fall,
        delay=loop.delay,
        gbw=loop.gbw,
        integrator_gbw=loop.integrator_gbw,
        vos1=ve,
    )


def test_loop_timing_is_predict_when_the_drives_sum_to_the_span() -> None:
    rng = np.random.default_rng(1)
    loop, x = random_loops(rng, RNG_POINTS)
    ve = rng.uniform(loop.ve_lo, loop.ve_hi)
    pred = full(loop, x["k"], x["p"], ve)
    t = loop_timing(
        x["k"],
        x["p"] / x["k"],
        loop.vh_lo + loop.vl_lo,
        loop.vh_lo - ve,
        loop.vl_lo + ve,
        slew_rise=loop.slew_rise,
        slew_fall=loop.slew_fall,
        delay=loop.delay,
        gbw=loop.gbw,
        integrator_gbw=loop.integrator_gbw,
    )
    np.testing.assert_allclose(t.period_s, pred.period_s, rtol=1e-12)
    amp = x["k"] * (loop.vh_lo + loop.vl_lo) + t.overshoot_v
    np.testing.assert_allclose(amp, pred.amplitude_vpp, rtol=1e-12)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), intervals=st.booleans())
def test_every_point_lies_within_its_bounds(seed: int, intervals: bool) -> None:
    """Brute force over the model: random Ve in the range and random P in [p1, p2] give a
    period inside period_bounds at that P, an amplitude inside amplitude_bounds over
    [p1, p2], and a timing share above timing_share_floor over [p1, p2]; with level
    intervals, at random levels inside them too (``search.bounds``, (M5))."""
    rng = np.random.default_rng(seed)
    loop, x = random_loops(rng, 500)
    levels = None
    if intervals:
        loop = with_level_intervals(rng, loop)
        levels = levels_inside(rng, loop)
    k = x["k"]
    # the bounds are claimed where a row can meet a timing share of at most 0.4
    p1 = np.maximum(x["p"], share_p_floor(loop, k, 0.4))
    p2 = p1 * 10 ** rng.uniform(0, 0.3, len(p1))
    p = p1 * (p2 / p1) ** rng.random(len(p1))
    ve = rng.uniform(loop.ve_lo, loop.ve_hi)
    pred = full(loop, k, p, ve, levels)
    tight = 1e-12
    t = period_bounds(loop, k, p)
    assert np.all(pred.period_s >= t.lo * (1 - tight)) and np.all(
        pred.period_s <= t.hi * (1 + tight)
    )
    a = amplitude_bounds(loop, k, p1, p2)
    amp = np.asarray(pred.amplitude_vpp)
    assert np.all(amp >= a.lo * (1 - tight)) and np.all(amp <= a.hi * (1 + tight))
    share = np.asarray(pred.timing_share)
    assert np.all(share >= timing_share_floor(loop, k, p1, p2) - tight)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), intervals=st.booleans())
def test_window_leaves_out_only_rows_outside_the_band(seed: int, intervals: bool) -> None:
    """P just outside the window (and far outside) cannot put the period in the band, at any
    Ve of the range (and any levels inside the intervals); P inside can (the window is not
    empty for a reachable band)."""
    rng = np.random.default_rng(seed)
    loop, x = random_loops(rng, 300)
    if intervals:
        loop = with_level_intervals(rng, loop)
    k = x["k"]
    ve = rng.uniform(loop.ve_lo, loop.ve_hi)
    centre = np.asarray(full(loop, k, x["p"], ve, levels_inside(rng, loop)).period_s)
    t_min = centre * (1 - 10 ** rng.uniform(-4, -1, len(k)))
    t_max = centre * (1 + 10 ** rng.uniform(-4, -1, len(k)))
    w = window(loop, k, t_min, t_max)
    assert np.all(w.lo <= x["p"]) and np.all(x["p"] <= w.hi)
    ok = claimed(loop, k)  # elsewhere the window is everything: nothing is left out
    lo = ok & (w.lo > 0)  # 0: the delays alone reach t_min, nothing below to leave out
    hi = np.isfinite(w.hi)
    assert ok.mean() > 0.5 and lo.mean() > 0.4 and np.array_equal(hi, ok)
    for factor in (1 - 1e-7, 0.9, 0.5):
        ve = rng.uniform(loop.ve_lo, loop.ve_hi)
        p = np.where(lo, w.lo, 1.0) * factor
        below = np.asarray(full(loop, k, p, ve, levels_inside(rng, loop)).period_s)
        assert np.all(below[lo] < t_min[lo])
    for factor in (1 + 1e-7, 1.1, 2.0):
        ve = rng.uniform(loop.ve_lo, loop.ve_hi)
        p = np.where(hi, w.hi, 1.0) * factor
        above = np.asarray(full(loop, k, p, ve, levels_inside(rng, loop)).period_s)
        assert np.all(above[hi] > t_max[hi])


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), intervals=st.booleans(), share=st.floats(0.01, 0.4))
def test_screen_ends_leave_out_only_rows_outside_the_band(
    seed: int, intervals: bool, share: float
) -> None:
    """Brute force over the model: a point whose period is at most t_max has P at most
    ``p_ceiling`` (wherever that is finite), and a point whose period is at least t_min and
    whose timing share is at most s has P at least ``p_floor``, at any Ve and levels; and the
    ceiling is finite wherever a bound is claimed, and never below the window's upper end."""
    rng = np.random.default_rng(seed)
    loop, x = random_loops(rng, 2000)
    if intervals:
        loop = with_level_intervals(rng, loop)
    k, p = x["k"], x["p"]
    pred = full(loop, k, p, rng.uniform(loop.ve_lo, loop.ve_hi), levels_inside(rng, loop))
    period = np.asarray(pred.period_s)
    # bands around each point's own period, some ending right at it
    t_max = period * np.where(rng.random(len(k)) < 0.3, 1.0, 10 ** rng.uniform(0, 1, len(k)))
    t_min = period * np.where(rng.random(len(k)) < 0.3, 1.0, 10 ** -rng.uniform(0, 1, len(k)))
    ceiling = p_ceiling(loop, k, t_max)
    assert np.all(p <= ceiling)
    ok = claimed(loop, k)
    assert np.all(np.isfinite(ceiling[ok]))
    upper = window(loop, k, t_min, t_max).hi
    assert np.all(ceiling[ok] >= upper[ok])
    inside = np.asarray(pred.timing_share) <= share
    floor = p_floor(loop, t_min, share)
    assert inside.mean() > 0.2
    assert np.all(p[inside] >= floor[inside])


def test_joint_bounds_are_the_separate_ones() -> None:
    """``point_bounds`` and ``range_bounds`` compute shared timings once: the same numbers as
    ``period_bounds`` with ``amplitude_bounds`` at one P, and as ``amplitude_bounds`` with
    ``timing_share_floor`` over a range."""
    rng = np.random.default_rng(5)
    loop, x = random_loops(rng, 1000)
    k, p = x["k"], x["p"]
    t, a = point_bounds(loop, k, p)
    separate = (*period_bounds(loop, k, p), *amplitude_bounds(loop, k, p, p))
    for got, want in zip((*t, *a), separate, strict=True):
        np.testing.assert_array_equal(got, want)
    p2 = p * 1.3
    amp, share = range_bounds(loop, k, p, p2)
    np.testing.assert_array_equal(amp.lo, amplitude_bounds(loop, k, p, p2).lo)
    np.testing.assert_array_equal(amp.hi, amplitude_bounds(loop, k, p, p2).hi)
    np.testing.assert_array_equal(share, timing_share_floor(loop, k, p, p2))


def _edge_grid() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(μ, D, L) over the tabulated edge's whole domain and beyond each end (where it is
    continued or clamped), at three times the table's resolution in every axis, for levels
    from EDGE_LEVEL_MIN up (where the bounds claim the properties)."""
    mu = np.exp(np.arange(LN_MU[0] - 4.0, LN_MU[-1] + 2.0, (LN_MU[1] - LN_MU[0]) / 3))
    delay = np.expm1(np.arange(0.0, Q_DELAY[-1] + 0.3, (Q_DELAY[1] - Q_DELAY[0]) / 3))
    step = (LN_LEVEL[1] - LN_LEVEL[0]) / 3
    level = np.exp(np.arange(math.log(EDGE_LEVEL_MIN), LN_LEVEL[-1] + 2.0, step))
    return mu, delay, level


def test_the_edge_mean_time_has_the_properties_the_bounds_rest_on() -> None:
    """G(L; μ, D) of the tabulated comparator edge (``transition.scaled_mean_time``), on a
    grid three times finer than its table in every axis and past each end: (G1) it does not
    rise with μ, (G2) μ·G does not fall with μ, (G3) it does not fall with L (brute force over
    the model's own function; 1e-9 of rounding allowed). Below EDGE_LEVEL_MIN they fail (the
    interpolation rings), which is why no bound is claimed there."""
    mu, delay, level = _edge_grid()
    g = scaled_mean_time(mu[:, None, None], delay[None, :, None], level[None, None, :])
    slack = 1e-9 * np.maximum(np.abs(g[:-1]), 1.0)
    assert np.all(np.diff(g, axis=0) <= slack), "G1"
    mg = mu[:, None, None] * g
    assert np.all(np.diff(mg, axis=0) >= -1e-9 * np.maximum(np.abs(mg[:-1]), 1e-30)), "G2"
    assert np.all(np.diff(g, axis=2) >= -1e-9 * np.maximum(np.abs(g[:, :, :-1]), 1.0)), "G3"


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), share=st.floats(0.01, 0.4), band=st.floats(0.001, 0.3))
def test_overshoot_fraction_cap_holds_for_rows_within_the_limits(
    seed: int, share: float, band: float
) -> None:
    """Every random point whose timing share is at most s and whose period lies in a band
    with T_max/T_min = r has (A - k·span)/(k·span) ≤ s·r/(1 - s)."""
    rng = np.random.default_rng(seed)
    loop, x = random_loops(rng, 3000)
    k, p = x["k"], x["p"]
    ve = rng.uniform(loop.ve_lo, loop.ve_hi)
    pred = full(loop, k, p, ve)
    span = loop.vh_lo + loop.vl_lo
    s = np.asarray(pred.timing_share)
    # every point is the centre of some band of relative half-width `band`
    ratio = (1 + band) / (1 - band)
    eps = (np.asarray(pred.amplitude_vpp) - k * span) / (k * span)
    cap = overshoot_fraction_cap(share, ratio)
    assert np.all(eps[s <= share] <= cap * (1 + 1e-12))
    assert math.isfinite(cap)


def test_a_row_outside_its_bounds_withdraws_the_proof(monkeypatch: pytest.MonkeyPatch) -> None:
    """If a model change broke a monotonicity, evaluated rows would fall outside the bounds
    that windowed them: the search then reports nothing as proven."""
    from pathlib import Path

    from tristock.search import rows as search_rows
    from tristock.search.bounds import Bounds
    from tristock.search.enumeration import enumerate_top
    from tristock.search.model import build_model
    from tristock.spec.loading import parse_spec
    from tristock.stock.catalog import load_catalog

    demo = load_catalog(Path(__file__).resolve().parents[2] / "catalogs" / "demo")
    spec = parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0},
            "frequency": {"target_hz": 2000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 5.0},
            "ranking": {"top": 3},
        }
    )
    assert enumerate_top(build_model(spec, demo), 3, 10.0).proven_optimal

    def too_narrow(loop: StageLoop, k: np.ndarray, p: np.ndarray) -> tuple[Bounds, Bounds]:
        b, a = point_bounds(loop, k, p)
        return Bounds(b.lo * 1.01, b.hi * 1.01), a

    monkeypatch.setattr(search_rows, "point_bounds", too_narrow)
    assert not enumerate_top(build_model(spec, demo), 3, 10.0).proven_optimal
