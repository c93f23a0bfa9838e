"""The facts the tuned search's bounds rest on, and the bounds themselves, against the model.

Outside references, named beside each check:
- the model's own functions (``transition.scaled_mean_time``, the tabulated comparator edge
  ``circuit.predict`` evaluates; ``integrator.lag_overshoot_area``; ``looptiming.loop_timing``,
  equal to ``predict`` where a + b = VH + VL, tests/search/test_search_bounds.py), evaluated by
  brute force on grids three times finer than the edge's table and past its ends, and at
  random points: every bound of ``tuning.loopbounds`` must hold for the model's values there.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.typing import NDArray

from tristock.circuits.edgetable import LN_LEVEL, LN_MU, Q_DELAY
from tristock.circuits.integrator import lag_overshoot_area
from tristock.circuits.looptiming import LoopTiming, loop_timing
from tristock.circuits.transition import scaled_mean_time
from tristock.designs.tuned.dial import AREA_ROUNDING
from tristock.designs.tuned.edges import OVERSHOOT_EXCESS, EdgeTables
from tristock.designs.tuned.loopbounds import (
    CornerRows,
    above_root,
    below_root,
    overshoot_ceiling,
    overshoot_floor,
    period_hi,
    period_lo,
    share_floor,
)
from tristock.search.bounds import EDGE_LEVEL_MIN

F64 = NDArray[np.float64]
ROUNDING = 1e-9


def _grid() -> tuple[F64, F64, F64]:
    """μ, D and L three times finer than the table, one table step and more past each end
    (L down to a hundredth of the table's first level)."""
    mu = np.exp(np.arange(LN_MU[0] - 1.5, LN_MU[-1] + 1.0, (LN_MU[1] - LN_MU[0]) / 3))
    delay = np.expm1(np.arange(0.0, Q_DELAY[-1] + 0.3, (Q_DELAY[1] - Q_DELAY[0]) / 3))
    step = (LN_LEVEL[1] - LN_LEVEL[0]) / 3
    level = np.exp(np.arange(LN_LEVEL[0] - math.log(100.0), LN_LEVEL[-1] + 2.0, step))
    return mu, delay, level


def test_the_edge_is_never_ahead_of_a_pure_slew_and_its_overshoot_time_is_bounded() -> None:
    """(G0) G(L) ≥ L/2 and (G3r) max over L' ≤ L of G(L') ≤ (1 + δ)·G(L), δ =
    OVERSHOOT_EXCESS, at every level, the smallest included (``tuning.edges``)."""
    mu, delay, level = _grid()
    g = scaled_mean_time(mu[:, None, None], delay[None, :, None], level[None, None, :])
    assert np.all(g >= 0.5 * level * (1 - ROUNDING)), "G0"
    running = np.maximum.accumulate(g, axis=2)
    assert np.all(running <= (1 + OVERSHOOT_EXCESS) * g), "G3r"


@pytest.mark.parametrize("ratio", [0.0, 1e-3, 0.03, 0.3, 1.0, 3.0, 30.0, 300.0, 1e4])
def test_a_faster_comparator_switches_no_later(ratio: float) -> None:
    """(G4): at a fixed μ, G(λ·w; μ, λ·t)/λ does not rise with λ, i.e. G(L; μ, ρ·L)/L does
    not rise along each ray D = ρ·L from L = EDGE_LEVEL_MIN on (``tuning.edges``)."""
    mu, _, _ = _grid()
    step = (LN_LEVEL[1] - LN_LEVEL[0]) / 6
    level = np.exp(np.arange(math.log(EDGE_LEVEL_MIN), LN_LEVEL[-1] + 2.0, step))
    h = scaled_mean_time(mu[:, None], ratio * level[None, :], level[None, :]) / level
    assert np.all(np.diff(h, axis=1) <= ROUNDING * np.abs(h[:, :-1]))


def test_the_lag_area_does_not_fall_with_the_lag_or_either_drive() -> None:
    """(A1) of ``tuning.dial``: ``lag_overshoot_area`` does not fall with τi, with the drive
    before the edge nor with the one after it (dense grids; a step edge included), up to the
    rounding of its closed form (below 1e-8 of the area; ``dial`` allows AREA_ROUNDING)."""
    volts = np.geomspace(1e-3, 50.0, 40)
    lag = np.geomspace(1e-10, 1e-4, 30)
    for slew in (1e4, 1e6, 3e7, 1e9, math.inf):
        area = lag_overshoot_area(
            volts[:, None, None], volts[None, :, None], np.asarray(slew), lag[None, None, :]
        )
        tol = AREA_ROUNDING / 10 * np.maximum(np.abs(area), 1e-300)
        assert np.all(np.isfinite(area)) and np.all(area >= 0)
        assert np.all(np.diff(area, axis=0) >= -tol[:-1]), f"before, SR {slew:g}"
        assert np.all(np.diff(area, axis=1) >= -tol[:, :-1]), f"after, SR {slew:g}"
        assert np.all(np.diff(area, axis=2) >= -tol[:, :, :-1]), f"lag, SR {slew:g}"
        assert np.all(area <= volts[:, None, None] * lag[None, None, :] * (1 + ROUNDING))


def _rows(seed: int, n: int = 400) -> tuple[CornerRows, dict[str, F64]]:
    """n random op amps at a corner (span 2..30 V, slew 0.1..300 V/µs, delay 0..5 µs, GBW
    100 kHz..300 MHz, some ideal) with random drives, k ranges and P."""
    rng = np.random.default_rng(seed)
    span = rng.uniform(2, 30, n)
    slew = 10 ** rng.uniform(5, 8.5, n)
    delay = np.where(rng.random(n) < 0.2, 0.0, 10 ** rng.uniform(-9, -5.3, n))
    gbw = np.where(rng.random(n) < 0.15, np.inf, 10 ** rng.uniform(5, 8.5, n))
    a = span / 2 * rng.uniform(0.3, 1.7, n)
    b = np.maximum(span - a + rng.uniform(-0.1, 0.1, n) * span, 0.05 * span)
    k_a = 10 ** rng.uniform(-2, -0.05, n)
    k_b = k_a * rng.uniform(1, 1.3, n)
    rows = CornerRows(EdgeTables(span, slew, delay, gbw), np.arange(n), a, b)
    values = {
        "k_a": k_a,
        "k_b": k_b,
        "k": k_a + (k_b - k_a) * rng.random(n),
        "p": 10 ** rng.uniform(-8, -1.5, n),
        "stretch": rng.uniform(1, 3, n),
        "target": rng.uniform(0.5, 2, n),
    }
    return rows, values


def _timing(rows: CornerRows, k: F64, p: F64) -> LoopTiming:
    t = rows.tables
    return loop_timing(
        k, p / k, t.span, rows.a, rows.b, slew_rise=t.slew, slew_fall=t.slew, delay=t.delay,
        gbw=t.gbw, integrator_gbw=t.gbw,
    )  # fmt: skip


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_every_model_point_lies_within_the_corner_bounds(seed: int) -> None:
    """At random (k in [k_a, k_b], P, drives) the model's period, overshoots and timing share
    (``loop_timing``, the full model) lie within the bounds of ``tuning.loopbounds``, and the
    roots' brackets leave out only points past the target."""
    rows, x = _rows(seed)
    k_a, k_b, p = x["k_a"], x["k_b"], x["p"]
    t = _timing(rows, x["k"], p)
    period = t.period_s
    assert np.all(period <= period_hi(rows, p, k_a, k_b) * (1 + ROUNDING))
    assert np.all(period >= period_lo(rows, p, k_a, k_b) * (1 - ROUNDING))
    assert np.isfinite(period_hi(rows, p, k_a, k_b)).mean() > 0.8  # not vacuous
    target = period * x["target"]
    below = below_root(rows, k_a, k_b, target)
    assert np.all((p >= below) | (period < target))
    above = above_root(rows, k_a, k_b, target)
    assert np.all((p <= above) | (period > target))
    top, bottom = overshoot_floor(rows, k_a, k_b, p * x["stretch"])
    assert np.all(t.overshoot_top_v >= top * (1 - ROUNDING))
    assert np.all(t.overshoot_bottom_v >= bottom * (1 - ROUNDING))
    top, bottom = overshoot_ceiling(rows, k_a, k_b, p / x["stretch"])
    assert np.all(t.overshoot_top_v <= top * (1 + ROUNDING))
    assert np.all(t.overshoot_bottom_v <= bottom * (1 + ROUNDING))
    assert np.isfinite(top).mean() > 0.7
    share = share_floor(rows, k_a, k_b, p * x["stretch"])
    assert np.all(t.timing_share >= share - ROUNDING)
