"""Reasons for an infeasible spec (``search.explain``) within a deadline.

The reasons rest on top-1 searches; a search stopped by the deadline with nothing found
proves nothing, so no reason may be drawn from it: the answer then says the constraint is
unsettled instead of naming a wrong one. Reference: the same spec with no deadline (the
demo stock room; max_cost 0.12 is below the cheapest usable op amp's cost per board, the
catalog's own price column, as in tests/designs/test_search_design.py).
"""

from __future__ import annotations

import time

from tristock.examples import demo_catalog_dir, example_spec_path
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
