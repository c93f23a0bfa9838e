"""The notes under the design table: fewer designs than ``--top`` asked for, and a rank 1
whose Monte Carlo yield is below 90 % (common practice: a build losing more than one board in
ten needs a closer look), each said exactly when it holds."""

from __future__ import annotations

import pytest
from cli_helpers import DEMO_CATALOG, SMALL_CATALOG, SMALL_SPEC

from tristock.cli.design import LOW_YIELD, render_design
from tristock.designs import design
from tristock.examples import example_spec_path
from tristock.spec.loading import load_spec, parse_spec
from tristock.stock.catalog import load_catalog


@pytest.mark.parametrize("by", ["cost", "frequency_error"])
def test_a_low_yield_rank_1_is_noted_with_its_figure(by: str) -> None:
    data = load_spec(example_spec_path("demo")).model_dump()
    data["ranking"].update({"by": by, "top": 3})
    result = design(parse_spec(data), load_catalog(DEMO_CATALOG), samples=1000)
    text = " ".join(render_design(result).split())  # the notes wrap at 100 columns
    low = result.candidates[0].yield_fraction < LOW_YIELD
    assert ("into both bands; guarantee" in text) == low
    if low:
        assert f"rank 1 puts {100 * result.candidates[0].yield_fraction:.1f} % of boards" in text


def test_fewer_designs_than_asked_are_counted() -> None:
    data = parse_spec(SMALL_SPEC).model_dump()
    data["ranking"]["top"] = 100
    result = design(parse_spec(data), load_catalog(SMALL_CATALOG))
    assert result.search.proven_optimal and 0 < len(result.candidates) < 100
    text = " ".join(render_design(result).split())
    assert f"note: {len(result.candidates)} design(s) meet the spec; --top asked for 100" in text
