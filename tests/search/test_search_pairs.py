"""The pairs built level by level (``search.pairs``) against the pairs built all at once.

Reference: the same ``PairSource`` asked for every pair in one go (``complete(inf)``), filtered
here by bound. Built in steps of rising levels, each level must return exactly those pairs
(same pairs, same bounds and windows, same opening order), since the engine's answer and
its count of scored rows follow from that order; and a search stopped by its deadline while
building must not call itself proven (nor report the spec infeasible). The same holds where
the form narrows the levels by pair (the zener-clamped loop), whose pairs are also held to
their stage's loop.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from tristock.circuits import TOPOLOGIES, spec_topologies
from tristock.designs.fixed import design_fixed
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.bounds import amplitude_bounds, share_p_floor, timing_share_floor, window
from tristock.search.enumeration import enumerate_top
from tristock.search.model import build_model
from tristock.search.pairfigures import PERIOD_EDGE, figures
from tristock.search.pairs import Pairs, PairSource
from tristock.search.products import product_index as products_of
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog

FIELDS = Pairs.__dataclass_fields__


@pytest.fixture(scope="module")
def demo_model():  # type: ignore[no-untyped-def]
    spec = load_spec(example_spec_path())
    return build_model(spec, load_catalog(demo_catalog_dir()))


def same(a: Pairs, b: Pairs) -> bool:
    return len(a) == len(b) and all(np.array_equal(getattr(a, f), getattr(b, f)) for f in FIELDS)


def test_levels_give_the_pairs_of_one_build(demo_model) -> None:  # type: ignore[no-untyped-def]
    products = products_of(demo_model)
    everything = PairSource(demo_model, products, math.inf).complete(math.inf)
    assert len(everything) > 1000
    stepped = PairSource(demo_model, products, math.inf)
    assert not stepped.everything
    levels = np.quantile(everything.bound, [0.001, 0.01, 0.05, 0.3]).tolist()
    for level in levels:
        got = stepped.complete(level)
        assert len(got) > 0
        assert same(got, everything.take(everything.bound <= level))
        assert stepped.pairs.bound.max() > level  # built beyond what it returned: part bound
    # Asking for a lower level again re-uses what is built.
    assert same(stepped.complete(levels[0]), everything.take(everything.bound <= levels[0]))
    assert not stepped.cut


def test_fewer_pairs_are_built_than_exist(demo_model) -> None:  # type: ignore[no-untyped-def]
    full = enumerate_top(demo_model, 10, 60.0)
    assert full.proven_optimal
    source = PairSource(demo_model, products_of(demo_model), math.inf)
    source.complete(int(full.rows.primary[-1]))
    assert len(source.pairs) < len(source.complete(math.inf))


def test_deadline_while_building_is_not_proven(demo_model) -> None:  # type: ignore[no-untyped-def]
    source = PairSource(demo_model, products_of(demo_model), time.perf_counter() - 1.0)
    source.complete(math.inf)
    assert source.cut
    cut = enumerate_top(demo_model, 10, 0.0)
    assert not cut.proven_optimal


def test_design_cut_short_never_says_infeasible() -> None:
    spec = load_spec(example_spec_path())
    result = design_fixed(spec, load_catalog(demo_catalog_dir()), time_limit_s=1e-4)
    assert not result.search.proven_optimal
    assert result.infeasible is None


@pytest.mark.parametrize("example", ["clamped", "comparator"])
def test_a_deadline_while_the_stage_options_are_made_cuts_the_model(example: str) -> None:
    """The forms whose stage options grow with the resistor table (a clamp or pull-up R5)
    stop making them at the deadline; the model says it is cut, the engines do not search
    it, and the design is neither proven nor infeasible (common practice: a search cut
    short knows nothing of what it did not build)."""
    spec = load_spec(example_spec_path(example))
    catalog = load_catalog(demo_catalog_dir())
    topology = spec_topologies(spec)[0]
    whole = build_model(spec, catalog, topology)
    assert not whole.cut and whole.opamps
    cut = build_model(spec, catalog, topology, deadline=time.perf_counter())
    assert cut.cut and len(cut.opamps) < len(whole.opamps)
    assert not any("clamp its square" in e.reason for e in cut.exclusions)
    result = design_fixed(spec, catalog, time_limit_s=1e-4)
    assert not result.search.proven_optimal
    assert result.infeasible is None


def test_the_ratio_screen_drops_only_pairs_that_fail(demo_model) -> None:  # type: ignore[no-untyped-def]
    """Reference: every (U1, R1, R2) whose ratio lies in the op amp's ``k_range``, with its
    window and amplitude and share bounds computed directly (``search.bounds``), no screen:
    the pairs built must be exactly those it finds able to meet the spec, with the same P
    ranges (the screen over a wider P range, ``bounds.p_floor``/``p_ceiling``, only saves
    the root searches of ratios that fail anyway)."""
    index = products_of(demo_model)
    everything = PairSource(demo_model, index, math.inf).complete(math.inf)
    model, res = demo_model, demo_model.resistors
    spec = model.spec
    (fa, fb), (aa, ab) = model.band_f, model.band_a
    t_target = 1.0 / spec.target.target_hz
    t_min = t_target * math.exp(-fb) * (1 - PERIOD_EDGE)
    t_max = t_target * math.exp(-fa) * (1 + PERIOD_EDGE)
    ln_r = res.ln_value
    want = {}
    for o in model.opamps:
        k_lo, k_hi = o.k_range
        i1, i2 = (x.ravel() for x in np.meshgrid(np.arange(len(res)), np.arange(len(res))))
        near = (ln_r[i2] >= ln_r[i1] - math.log(k_hi) - 1e-12) & (
            ln_r[i2] <= ln_r[i1] - math.log(k_lo) + 1e-12
        )
        i1, i2 = i1[near], i2[near]
        k, inv = np.unique(res.value[i1] / res.value[i2], return_inverse=True)
        loop = model.loops(np.full(len(k), o.index))
        w = window(loop, k, np.full(len(k), t_min), np.full(len(k), t_max))
        p_lo = np.maximum(np.maximum(w.lo, k * math.exp(index.ln_min)),
                          share_p_floor(loop, k, spec.limits.max_timing_share))  # fmt: skip
        p_hi = np.minimum(w.hi, k * math.exp(index.ln_max))
        amp = amplitude_bounds(loop, k, p_lo, p_hi)
        a_t = spec.triangle.amplitude_vpp
        with np.errstate(invalid="ignore", divide="ignore"):
            ok = (p_lo <= p_hi) & (np.log(amp.hi / a_t) >= aa) & (np.log(amp.lo / a_t) <= ab)
        ok &= timing_share_floor(loop, k, p_lo, p_hi) <= spec.limits.max_timing_share
        for n in np.flatnonzero(ok[inv]):
            want[(o.index, int(i1[n]), int(i2[n]))] = (p_lo[inv[n]], p_hi[inv[n]])
    built = {
        (int(u), int(a), int(b)): (lo, hi)
        for u, a, b, lo, hi in zip(
            everything.u,
            everything.i1,
            everything.i2,
            everything.p_min,
            everything.p_max,
            strict=True,
        )
    }
    assert len(built) > 1000
    assert built == want


@pytest.fixture(scope="module")
def clamped_model():  # type: ignore[no-untyped-def]
    spec = load_spec(example_spec_path("clamped"))
    return build_model(spec, load_catalog(demo_catalog_dir()), TOPOLOGIES["clamped_schmitt"])


def test_pairs_narrowed_by_pair_keep_the_order_and_their_stages_bounds(clamped_model) -> None:  # type: ignore[no-untyped-def]
    """The zener-clamped form narrows the levels by pair: built in steps, each level still
    returns exactly the pairs of one build (the same bounds, windows and levels); each pair's
    levels lie inside its stage's, its P range inside its ratio's (the stage loop's
    window) and its bound at least the ratio's (reference: ``pairfigures.figures`` on the
    stage's loop, computed here)."""
    model = clamped_model
    assert model.form.levels_by_pair
    products = products_of(model)
    top = PairSource(model, products, math.inf)
    level = top.lowest + 40 * (top.first_level() - top.lowest)
    everything = top.complete(level)
    assert len(everything) > 1000 and everything.levels.shape == (len(everything), 4)
    stepped = PairSource(model, products, math.inf)
    for x in np.quantile(everything.bound, [0.05, 0.3, 1.0]).tolist():
        assert same(stepped.complete(x), everything.take(everything.bound <= x))
    stage = model.loops(everything.u)
    lv = everything.levels
    assert np.all((stage.vh_lo <= lv[:, 0]) & (lv[:, 1] <= stage.vh_hi))
    assert np.all((stage.vl_lo <= lv[:, 2]) & (lv[:, 3] <= stage.vl_hi))
    assert np.mean(lv[:, 1] - lv[:, 0]) < 0.8 * np.mean(stage.vh_hi - stage.vh_lo)
    wide = figures(model, products, stage, everything.k)
    assert np.all(wide.ok)
    assert np.all((everything.p_min >= wide.p_lo) & (everything.p_max <= wide.p_hi))
    assert np.mean(everything.p_max / everything.p_min) < np.mean(wide.p_hi / wide.p_lo)
