"""The tuned search's batch sizes change no value: every core's shared bounds are its own, so
``build_cores`` gives the same cores and bounds whether it computes them all at once or a few
thousand at a time between its looks at the clock (the bundled tuned example: 660,221 cores of
12 blocks of 133,956); and the walk's sieve groups and tighten batches change neither what it
takes nor how much it evaluates."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tristock.designs.tuned import cores as cores_module
from tristock.designs.tuned import search as search_module
from tristock.designs.tuned.model import build_tuned_model
from tristock.designs.tuned.search import walk
from tristock.designs.tuned.verdict import Verdicts
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec, parse_spec
from tristock.stock.catalog import load_catalog

FIELDS = ("u", "v", "i3", "i4", "cost", "fewest", "c_min", "c_max")


def test_cores_do_not_depend_on_the_batch_size(monkeypatch: pytest.MonkeyPatch) -> None:
    model = build_tuned_model(
        load_spec(example_spec_path("tuned")), load_catalog(demo_catalog_dir())
    )
    monkeypatch.setattr(cores_module, "CORE_BATCH", 1 << 30)  # every block in one call
    whole = cores_module.build_cores(model)
    monkeypatch.setattr(cores_module, "CORE_BATCH", 5000)  # uneven batches, a short last one
    batched = cores_module.build_cores(model)
    assert whole is not None and batched is not None and len(whole.u) > 5000
    for name in FIELDS:
        assert np.array_equal(getattr(whole, name), getattr(batched, name)), name


def test_sieve_groups_and_tighten_batches_change_no_answer(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """The walk takes the same designs, evaluates the same combinations and lists the same
    candidates whether each bin's chain floor is asked alone (a group of one bin) and bounds
    are tightened a batch at a time, or with the default group and tighten sizes."""
    spec = load_spec(example_spec_path("tuned"))
    data = spec.model_dump(mode="json", exclude_none=True)
    data["tuning"]["control"] = "series"
    model = build_tuned_model(parse_spec(data), load_catalog(demo_catalog_dir()))

    def walked() -> tuple[object, ...]:
        out = walk(model, 3, math.inf, Verdicts(model, 200, 0))
        found = [(f.row, f.chain, f.cost) for f, _ in out.accepted]
        return found, out.evaluated, out.combinations, out.candidates, out.proven

    default = walked()
    monkeypatch.setattr(cores_module, "GROUP", 1)
    monkeypatch.setattr(search_module, "TIGHTEN", search_module.BATCH)
    assert walked() == default
    assert len(default[0]) == 3
