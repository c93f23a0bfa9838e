"""The set-duty search form's facts that ``search.branches`` rests on.

(L1) the tabulated edge's level time v(L; μ, D) does not rise with μ and is positive, on a grid
three times finer than its table in every axis and past each end, from LEVEL_TIME_MIN up (brute
force over the model's own function, like G1-G3 in tests/search/test_search_bounds.py); the
ideal ramp currents are the model's (its ideal period); the mid-swing spread bounds the
model's high time on random rows of the demo's parts (reference: the model itself).
"""

from __future__ import annotations

import math

import numpy as np

from tristock.circuits import TOPOLOGIES
from tristock.circuits.duty_schmitt.physics import predict_point
from tristock.circuits.duty_schmitt.searchform import LEVEL_TIME_MIN, row_point
from tristock.circuits.edgetable import LN_LEVEL, LN_MU, Q_DELAY
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.transition import (
    scaled_level_time,
    scaled_mean_time,
)
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog


def test_the_edge_level_time_does_not_rise_with_the_slope() -> None:
    mu = np.exp(np.arange(LN_MU[0] - 4.0, LN_MU[-1] + 2.0, (LN_MU[1] - LN_MU[0]) / 3))
    delay = np.expm1(np.arange(0.0, Q_DELAY[-1] + 0.3, (Q_DELAY[1] - Q_DELAY[0]) / 3))
    step = (LN_LEVEL[1] - LN_LEVEL[0]) / 3
    level = np.exp(np.arange(math.log(LEVEL_TIME_MIN), LN_LEVEL[-1] + 2.0, step))
    v = scaled_level_time(mu[:, None, None], delay[None, :, None], level[None, None, :])
    assert np.all(v > 0)
    assert np.all(np.diff(v, axis=0) <= 1e-9 * np.maximum(np.abs(v[:-1]), 1.0)), "L1"


def test_the_edge_step_times_are_not_before_the_delay() -> None:
    """(L2), over the whole table and past each end: the mean passage time G(L) is positive
    and L·G(L) does not fall with L, so a mean over any band of levels, (b·G(b) - a·G(a))/(b -
    a), is not negative either: every step time of ``duty_schmitt.physics`` is at least the
    transport delay (``search.branches`` (B4))."""
    mu = np.exp(np.arange(LN_MU[0] - 4.0, LN_MU[-1] + 2.0, (LN_MU[1] - LN_MU[0]) / 3))
    delay = np.expm1(np.arange(0.0, Q_DELAY[-1] + 0.3, (Q_DELAY[1] - Q_DELAY[0]) / 3))
    step = (LN_LEVEL[1] - LN_LEVEL[0]) / 3
    level = np.exp(np.arange(LN_LEVEL[0] - 1.0, LN_LEVEL[-1] + 2.0, step))
    g = scaled_mean_time(mu[:, None, None], delay[None, :, None], level[None, None, :])
    assert np.all(g > 0)
    assert np.all(np.diff(level * g, axis=2) >= 0), "L2"


def test_ramp_currents_and_the_mid_swing_spread_bound_random_rows() -> None:
    spec = load_spec(example_spec_path("duty"))
    model = build_model(spec, load_catalog(demo_catalog_dir()), TOPOLOGIES["duty_schmitt"])
    form, rails = model.form, rails_from_supply(spec.supply)
    rng = np.random.default_rng(7)
    n = 4000
    u = rng.integers(0, len(model.stages), n)
    values = {
        "R1": np.exp(rng.uniform(np.log(1e3), np.log(1e5), n)),
        "R2": np.exp(rng.uniform(np.log(1e4), np.log(1e6), n)),
        "R3A": np.exp(rng.uniform(np.log(2e4), np.log(1e6), n)),
        "R3B": np.exp(rng.uniform(np.log(2e4), np.log(1e6), n)),
        "C1": np.exp(rng.uniform(np.log(1e-9), np.log(1e-7), n)),
    }
    levels = form.row_levels(model.stages, u, rails, values)
    p = predict_point(row_point(model.stages, u, values, levels), 0.0)
    ga, _ = form.ramp_currents(model.stages, u, values["R3A"], rails)
    _, gb = form.ramp_currents(model.stages, u, values["R3B"], rails)
    k = values["R1"] / values["R2"]
    big_h = k * (levels[0] + levels[1])
    h, l_ = values["C1"] * big_h / ga, values["C1"] * big_h / gb
    ideal = h + l_
    ok = np.isfinite(np.asarray(p.period_s))
    # the model's timing share is 1 - ideal/T with this ideal period
    np.testing.assert_allclose(
        (1 - np.asarray(p.timing_share))[ok], (ideal / p.period_s)[ok], rtol=1e-9
    )
    f_lo = 1.0 / np.asarray(p.period_s)
    delta, claimed = form.mid_swing_spread(model.stages, u, k, big_h * f_lo, rails)
    high = np.asarray(p.duty_high) * np.asarray(p.period_s)
    e = np.asarray(p.period_s) - ideal
    sel = ok & claimed
    assert sel.sum() > 1000
    assert np.all((high - h)[sel] >= -delta[sel] * (1 + 1e-9) - 1e-15)
    assert np.all((high - h)[sel] <= (e + delta)[sel] * (1 + 1e-9) + 1e-15)
    amp = np.asarray(p.amplitude_vpp)
    assert np.all(amp[sel] >= big_h[sel] * (1 - 1e-9))
    assert np.all(amp[sel] <= (big_h * (1 + e / np.minimum(h, l_)))[sel] * (1 + 1e-9))
