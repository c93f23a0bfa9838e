"""The (R3, C1) choices of a window (``search.products``) against a sorted product table.

Reference: brute force: every eligible (R3, C1) listed with ln R3 + ln C1 (the same
floating-point sum), sorted, and each window answered by two binary searches, as the engine
did before the index replaced the table. The index must give exactly the same rows for any
window (edges landing on table entries, empty, inverted, infinite), with the allowed masks
of a re-optimisation and with a budget on the (R3, C1) term.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.model import SearchModel, build_model
from tristock.search.products import product_index
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog


@pytest.fixture(scope="module")
def demo_model() -> SearchModel:
    return build_model(load_spec(example_spec_path()), load_catalog(demo_catalog_dir()))


def table(model: SearchModel) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Every eligible (R3, C1) sorted by ln(R3·C1): ln, i3, j, term."""
    res, cap = model.resistors, model.capacitors
    i3 = np.repeat(np.arange(len(res)), len(cap))
    j = np.tile(np.arange(len(cap)), len(res))
    keep = model.allows("R3", len(res))[i3] & model.allows("C1", len(cap))[j]
    i3, j = i3[keep], j[keep]
    ln = res.ln_value[i3] + cap.ln_value[j]
    term = model.resistor_term(i3) + model.capacitor_term(j)
    order = np.argsort(ln, kind="stable")
    return ln[order], i3[order], j[order], term[order]


def reference(model: SearchModel, ln_lo: np.ndarray, ln_hi: np.ndarray, budget=None) -> set:  # type: ignore[no-untyped-def]
    ln, i3, j, term = table(model)
    lo = np.searchsorted(ln, ln_lo, side="left")
    hi = np.searchsorted(ln, ln_hi, side="right")
    rows = set()
    for n in range(len(ln_lo)):
        for at in range(lo[n], hi[n]):
            if budget is None or term[at] <= budget[n]:
                rows.add((n, int(i3[at]), int(j[at]), int(term[at])))
    return rows


def windows(model: SearchModel, rng: np.random.Generator, n: int) -> tuple[np.ndarray, ...]:
    """Windows of every kind: random widths, edges exactly on table entries, empty and
    inverted ones, and unbounded ends."""
    ln = table(model)[0]
    centre = rng.uniform(ln[0] - 0.5, ln[-1] + 0.5, n)
    width = 10 ** rng.uniform(-4, -0.5, n)
    lo, hi = centre - width, centre + width
    on = rng.integers(0, len(ln), n)
    edge = rng.random(n) < 0.3
    lo = np.where(edge, ln[on], lo)
    hi = np.where(
        edge & (rng.random(n) < 0.5), ln[np.minimum(on + rng.integers(0, 40, n), len(ln) - 1)], hi
    )
    hi = np.where(rng.random(n) < 0.05, lo - 0.01, hi)  # inverted: nothing
    lo = np.where(rng.random(n) < 0.03, -np.inf, lo)
    hi = np.where(rng.random(n) < 0.03, np.inf, hi)
    return lo, hi


def got(model: SearchModel, lo: np.ndarray, hi: np.ndarray, budget=None) -> set:  # type: ignore[no-untyped-def]
    c = product_index(model).choices(lo, hi, budget)
    rows = set(zip(c.which.tolist(), c.i3.tolist(), c.j.tolist(), c.term.tolist(), strict=True))
    assert len(rows) == len(c)  # no row twice
    return rows


def test_windows_give_the_table_rows(demo_model: SearchModel) -> None:
    rng = np.random.default_rng(3)
    lo, hi = windows(demo_model, rng, 300)
    want = reference(demo_model, lo, hi)
    assert len(want) > 10_000
    assert got(demo_model, lo, hi) == want
    sizes = product_index(demo_model).sizes(lo, hi)
    counts = np.bincount([w for w, *_ in want], minlength=len(lo))
    assert np.all(sizes >= counts)


def test_masks_and_budget(demo_model: SearchModel) -> None:
    rng = np.random.default_rng(4)
    res, cap = demo_model.resistors, demo_model.capacitors
    masked = dataclasses.replace(
        demo_model,
        allowed={"R3": rng.random(len(res)) < 0.4, "C1": rng.random(len(cap)) < 0.6},
    )
    lo, hi = windows(masked, rng, 200)
    terms = table(masked)[3]
    budget = rng.integers(int(terms.min()) - 5, int(np.quantile(terms, 0.5)), len(lo))
    assert got(masked, lo, hi) == reference(masked, lo, hi)
    want = reference(masked, lo, hi, budget)
    assert 0 < len(want) < len(reference(masked, lo, hi))
    assert got(masked, lo, hi, budget) == want
    index = product_index(masked)
    ln = table(masked)[0]
    assert index.ln_min == ln[0] and index.ln_max == ln[-1]
    assert index.min_term == terms.min()


def test_nothing_eligible(demo_model: SearchModel) -> None:
    none = dataclasses.replace(
        demo_model, allowed={"C1": np.zeros(len(demo_model.capacitors), dtype=bool)}
    )
    assert product_index(none).empty
