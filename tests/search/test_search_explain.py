"""Reasons for an infeasible spec (``search.explain``) within a deadline.

The reasons rest on top-1 searches; a search stopped by the deadline with nothing found
proves nothing, so no reason may be drawn from it: the answer then says the constraint is
unsettled instead of naming a wrong one. Reference: the same spec with no deadline (the
demo stock room; max_cost 0.12 is below the cheapest usable op amp's cost per board, the
catalog's own price column, as in tests/designs/test_search_design.py).
"""

from __future__ import annotations

import dataclasses
import time

import pytest

from tristock.circuits import spec_topologies
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.enumeration import enumerate_top
from tristock.search.explain import UNSETTLED, infeasible_reasons
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog


def test_a_deadline_that_cuts_the_searches_names_no_constraint() -> None:
    spec = load_spec(example_spec_path())
    spec = spec.model_copy(update={"limits": spec.limits.model_copy(update={"max_cost": 0.12})})
    catalog = load_catalog(demo_catalog_dir())
    model = build_model(spec, catalog)
    reasons = infeasible_reasons(model, catalog)
    assert "max_cost 0.12" in " ".join(reasons)
    t0 = time.perf_counter()
    assert infeasible_reasons(model, catalog, deadline=t0 - 1.0) == [UNSETTLED]
    assert time.perf_counter() - t0 < 1.0
    later = infeasible_reasons(model, catalog, deadline=time.perf_counter() + 30.0)
    assert later == reasons


def test_the_comparator_common_mode_limit_is_named() -> None:
    """The comparator example without its rank-1 U2 (GC-PP2F): the other push-pull U2's + input
    leaves its common-mode range above k = 0.3996 (``circuits.comparator_schmitt.commonmode``:
    (3.8 - 2.5 - 1 mV)/(2.3 + 2.25) = q, k = q/(1 - q), from the demo table's columns), the
    open-drain one's above 0.2831, below the amplitude's window: the reasons name both parts
    and their ranges, and the search proves that nothing is left."""
    spec = load_spec(example_spec_path("comparator"))
    catalog = load_catalog(demo_catalog_dir())
    kept = tuple(c for c in catalog.comparators if c.id != "GC-PP2F")
    catalog = dataclasses.replace(catalog, comparators=kept)
    topology = spec_topologies(spec)[0]
    model = build_model(spec, catalog, topology)
    q = (3.8 - 2.5 - 1e-3) / (2.3 + 2.25)
    assert [o.k_range[1] for o in model.opamps] == [pytest.approx(q / (1 - q), rel=1e-12)] * len(
        model.opamps
    )
    found = enumerate_top(model, 1, 30.0)
    assert len(found.rows) == 0 and found.proven_optimal
    text = " ".join(infeasible_reasons(model, catalog))
    assert "U2 GC-PP1F: its input common-mode range -0.2..3.8 V" in text
    assert f"up to {q / (1 - q):.4g}" in text
    assert "U2 GC-OD2: its input common-mode range -0.3..3.5 V" in text
