"""The exact search's bounds (``search.bounds``) hold every row of the zener-clamped loop.

The clamped loop's timing enters the bounds as a delay interval and its levels as the design
point's intervals (``clamped_schmitt.clamplevels``, "Timing", and ``designpoint``); the
argument there is checked here on random rows of the demo stock room's parts: every op amp,
zener and R5 the search makes stages of on four rails, with R1, R2, R3 from the resistor
table and C1 over four decades. Each row's frequency, amplitude and timing share is the
topology's own model (``predict_rows`` = ``CLAMPED_SCHMITT.predict``, itself checked against
ngspice in tests/circuits); the reference is the claim itself: the model's values inside the
bounds the engines prune with, over the rows the bounds claim (a valid row with its timing
share within the limit and its swing at most twice the band's largest amplitude). The same
holds for the loop of each row's (stage, R1/R2 pair), whose level intervals the form narrows
with R1 + R2 known (``ClampedSchmittForm.pair_levels``), and those lie inside the stage's.
"""

from __future__ import annotations

import numpy as np
import pytest

from tristock.circuits.clamped_schmitt import CLAMPED_SCHMITT, SEARCH_FORM
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.searchform import StageLoop
from tristock.examples import demo_catalog_dir
from tristock.search.bounds import overshoot_fraction_cap, point_bounds, range_bounds
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog

DEMO = load_catalog(demo_catalog_dir())
#: (rail, triangle Vpp, frequency Hz): single-digit to ±15 V rails, small to large swings.
CASES = [(5.0, 2.0, 200.0), (9.0, 1.0, 3000.0), (12.0, 5.0, 1000.0), (15.0, 8.0, 20000.0)]
ROWS = 12000


def spec_at(v: float, amplitude: float, f: float) -> Spec:
    return parse_spec(
        {
            "circuit": {"clamp": "zener"},
            "supply": {"positive_v": v, "negative_v": -v, "tolerance_pct": 5.0},
            "frequency": {"target_hz": f, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": amplitude, "tolerance_pct": 5.0},
            "build": {"boards": 1},
            "limits": {"resistance_min_ohm": 100.0},
        }
    )


def test_the_clamped_form_claims_proven_bounds() -> None:
    assert CLAMPED_SCHMITT.search_form() is SEARCH_FORM
    assert SEARCH_FORM.bounds_proven


@pytest.mark.parametrize("by_pair", [False, True], ids=["stage", "pair"])
@pytest.mark.parametrize(("v", "amplitude", "f"), CASES)
def test_every_row_lies_inside_the_bounds(
    v: float, amplitude: float, f: float, by_pair: bool
) -> None:
    """The stage's loop, and the loop of each row's (stage, R1/R2 pair) with the intervals of
    ``pair_levels`` (R3 anywhere in the values drawn), must both bound every row."""
    spec = spec_at(v, amplitude, f)
    values = np.array(sorted({r.value_ohm for r in DEMO.resistors if r.value_ohm >= 100.0}))
    stages, _ = SEARCH_FORM.stage_options(spec, DEMO, values)
    assert len(stages) > 100
    rng = np.random.default_rng(int(v * 10 + amplitude))
    u = rng.integers(0, len(stages), ROWS)
    r1, r2, r3 = (rng.choice(values, ROWS) for _ in range(3))
    rows = {"R1": r1, "R2": r2, "R3": r3, "C1": 10 ** rng.uniform(-10.0, -6.0, ROWS)}
    rails = rails_from_supply(spec.supply)
    levels = SEARCH_FORM.row_levels(stages, u, rails, rows)
    with np.errstate(invalid="ignore"):  # rows past the model's ground answer NaN
        model = SEARCH_FORM.predict_rows(stages, u, rows, levels)
    pred = model.pred
    share = np.asarray(pred.timing_share)
    amp = np.asarray(pred.amplitude_vpp)
    a_max = amplitude * (1 + spec.triangle.tolerance_pct / 100)
    with np.errstate(invalid="ignore"):
        claimed = model.valid & (share <= spec.limits.max_timing_share) & (amp <= 2 * a_max)
    n = np.flatnonzero(claimed)
    assert len(n) > 500, "too few rows the bounds claim: the case tests little"
    loop = StageLoop(
        *(np.array([getattr(stages[i].loop, f) for i in u[n]]) for f in StageLoop._fields)
    )
    if by_pair:
        stage_loop = loop
        found = SEARCH_FORM.pair_levels(
            stages, u[n], r1[n], r2[n], (float(values.min()), float(values.max())), rails
        )
        loop = SEARCH_FORM.pair_loop(stage_loop, found)
        # inside the stage's intervals, and narrower on the whole (the pair fixes R1 + R2)
        assert np.all((stage_loop.vh_lo <= loop.vh_lo) & (loop.vh_hi <= stage_loop.vh_hi))
        assert np.all((stage_loop.vl_lo <= loop.vl_lo) & (loop.vl_hi <= stage_loop.vl_hi))
        width = np.sum(loop.vh_hi - loop.vh_lo + loop.vl_hi - loop.vl_lo)
        assert width < 0.9 * np.sum(
            stage_loop.vh_hi - stage_loop.vh_lo + stage_loop.vl_hi - stage_loop.vl_lo
        )
    k = r1[n] / r2[n]
    p = k * r3[n] * rows["C1"][n]
    with np.errstate(divide="ignore", invalid="ignore"):  # a weakest drive of 0: no upper end
        period_b, amp_b = point_bounds(loop, k, p)
        _, share_floor = range_bounds(loop, k, p, p)
    period = np.asarray(pred.period_s)[n]
    # reference: the bounds' claim (search.bounds (M1)-(M6), clamplevels (T1)-(T4))
    assert np.all((period_b.lo <= period) & (period <= period_b.hi))
    assert np.all((amp_b.lo <= amp[n]) & (amp[n] <= amp_b.hi))
    assert np.all(share_floor <= share[n] + 1e-12)
    # the levels the model starts from lie in the stage's intervals (designpoint)
    vh, vl = levels[0][n], levels[1][n]
    assert np.all((loop.vh_lo <= vh) & (vh <= loop.vh_hi) & (loop.vl_lo <= vl) & (vl <= loop.vl_hi))
    # the k range's overshoot cap (search.model): A ≤ k·span_hi·(1 + ε), ε at the row's own
    # share and a band ratio of 1
    cap = np.array([overshoot_fraction_cap(float(s), 1.0) for s in share[n]])
    assert np.all(amp[n] <= k * loop.span_hi * (1 + cap) * (1 + 1e-12))
    # the bounds are finite for most rows (they prune)
    assert np.mean(np.isfinite(period_b.hi)) > 0.5
