"""The pairs built level by level (``search.pairs``) against the pairs built all at once.

Reference: the same ``PairSource`` asked for every pair in one go (``complete(inf)``), filtered
here by bound. Built in steps of rising levels, each level must return exactly those pairs
(same pairs, same bounds and windows, same opening order), since the engine's answer and
its count of scored rows follow from that order; and a search stopped by its deadline while
building must not call itself proven (nor report the spec infeasible).
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from tristock.designs.fixed import design_fixed
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.enumeration import enumerate_top
from tristock.search.enumeration import product_table as products_of
from tristock.search.model import build_model
from tristock.search.pairs import Pairs, PairSource
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
