"""The tuned search's batch sizes change no value: every core's shared bounds are its own, so
``build_cores`` gives the same cores and bounds whether it computes them all at once or a few
thousand at a time between its looks at the clock (the bundled tuned example: 660,221 cores of
12 blocks of 133,956); and the walk's sieve groups and tighten batches change neither what it
takes nor how much it evaluates."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from tristock.designs.tuned import cores as cores_module
from tristock.designs.tuned import search as search_module
from tristock.designs.tuned.chains import INF
from tristock.designs.tuned.coverage import range_verdicts
from tristock.designs.tuned.model import build_tuned_model
from tristock.designs.tuned.ranges import evaluate_ranges
from tristock.designs.tuned.report import design_from
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
    """The walk takes the same designs with the same range verdicts, evaluates the same
    combinations and lists the same candidates whether each bin's chain floor is asked alone
    (a group of one bin), the sieve takes 1,000 rows and the floors 7 at a time, bounds are
    tightened a batch at a time and candidates decided one at a time, or with the default
    sizes."""
    spec = load_spec(example_spec_path("tuned"))
    data = spec.model_dump(mode="json", exclude_none=True)
    data["tuning"]["control"] = "series"
    model = build_tuned_model(parse_spec(data), load_catalog(demo_catalog_dir()))

    def walked() -> tuple[object, ...]:
        out = walk(model, 3, math.inf, Verdicts(model, 200, 0))
        found = [(f.row, f.chain, f.cost, detail) for f, detail in out.accepted]
        return found, out.evaluated, out.combinations, out.candidates, out.proven

    default = walked()
    monkeypatch.setattr(cores_module, "GROUP", 1)
    monkeypatch.setattr(cores_module, "ROWS", 1000)
    monkeypatch.setattr(cores_module, "FLOOR_BATCH", 7)
    monkeypatch.setattr(search_module, "TIGHTEN", search_module.BATCH)
    monkeypatch.setattr(search_module, "DECIDE_BATCH", 1)
    assert walked() == default
    assert len(default[0]) == 3


def test_ranges_decided_together_get_their_own_verdicts() -> None:
    """``range_verdicts`` of several ranges at once gives each the verdict it gets alone,
    also when one of them cannot oscillate (R3 so large that the integrator's bias error
    reaches a square level): that one fails, the others do not."""
    spec = load_spec(example_spec_path("tuned"))
    data = spec.model_dump(mode="json", exclude_none=True)
    data["tuning"]["control"] = "series"
    spec = parse_spec(data)
    model = build_tuned_model(spec, load_catalog(demo_catalog_dir()))
    out = walk(model, 1, math.inf, Verdicts(model, 200, 0))
    found, _ = out.accepted[0]
    good = [design_from(model, found.row, (j,)) for j in found.chain]
    bad = dataclasses.replace(good[0], r3=dataclasses.replace(good[0].r3, value_ohm=1e13))
    designs = [good[0], bad, good[1]]
    probes = [(math.nan,) * 4] * 3
    together = range_verdicts(designs, spec, 0, probes)
    alone = [range_verdicts([d], spec, 0, probes[:1])[0] for d in designs]
    assert together == alone
    assert [v.ok for v in together] == [True, False, True]


@pytest.mark.parametrize("guarantee", ["nominal", "worst_case"])
def test_ranges_left_out_by_the_bounds_are_never_usable(guarantee: str) -> None:
    """``evaluate_ranges`` evaluates only the ranges ``tighten``'s bounds allow: every range
    the full model finds usable with every capacitor evaluated is among them, and the usable
    ranges and their values come out the same (the tuned example under series control: the
    first combinations its walk lists, those whose tightened bound is finite)."""
    spec = load_spec(example_spec_path("tuned"))
    data = spec.model_dump(mode="json", exclude_none=True)
    data["tuning"]["control"] = "series"
    data.setdefault("limits", {})["guarantee"] = guarantee
    model = build_tuned_model(parse_spec(data), load_catalog(demo_catalog_dir()))
    cores = cores_module.build_cores(model)
    assert cores is not None
    n = cores.min_fewest()
    sh, _ = cores.select(model, n, int(cores.bound(n).min()) + 200_000)
    tight, allowed = cores_module.tighten(model, sh.take(np.arange(min(len(sh), 512))), n)
    keep = np.flatnonzero(tight < INF)  # the walk drops the others unevaluated
    sh, allowed = sh.take(keep), allowed[keep]
    assert len(sh) > 100 and 0 < allowed.sum() < allowed.size
    every = evaluate_ranges(model, sh, np.ones_like(allowed))
    some = evaluate_ranges(model, sh, allowed)
    usable = every.ranges.usable
    assert usable.any() and not (usable & ~allowed).any()
    assert np.array_equal(some.ranges.usable, usable)
    for name in ("corner_bottom", "corner_top", "f_bottom", "f_top"):
        assert np.array_equal(getattr(some, name)[usable], getattr(every, name)[usable]), name
