"""Re-optimisation of trimmed designs (``designs.trimmed.reoptimise``, through
``designs.reoptimise.reoptimise`` and the CLI): fewest changed designators, then the trimmed
ranking, proven; a trimmer that runs short, boards beyond every part's stock, time limits.

Reference: the full-model brute force of ``test_trim_exact`` (``accepted_rows`` narrowed per
designator, ``box_covers`` from the analysis), run for n = 0, 1, ... changed designators over
every set of n positions (the others pinned, the changed ones forced to another part), ranked
by (resolution, drift, cost), then keeping U1, then keeping C1, then stock codes (the README's
rule); its change count is a plain count of designators whose stock code differs (common
practice). Stock arithmetic (pieces = boards x uses) is the DESIGN.md rule.
"""

from __future__ import annotations

import dataclasses
import json
import time
from functools import cache
from itertools import combinations
from pathlib import Path
from typing import Any

import pytest
from test_trim import DEMO_DIR, demo, design_corners, design_of, example_result, example_spec
from trim_reference import accepted_rows, box_covers, small_catalog, small_spec

from tristock.cli import main
from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import ReoptimiseResult
from tristock.designs.trimmed import design_trimmed
from tristock.designs.trimmed.context import TRIM_DESIGNATORS
from tristock.spec.loading import SpecError, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Part

TIME_LIMIT_S = 120.0
SAMPLES = 200
Ids = tuple[str, ...]


def _pool(catalog: Catalog, designator: str) -> tuple[Any, ...]:
    if designator == "U1":
        return catalog.opamps
    if designator == "C1":
        return catalog.capacitors
    if designator == "RV1":
        return catalog.pots
    return catalog.resistors


def fewest_changes(
    spec: Spec, catalog: Catalog, current: dict[str, str], without: tuple[str, ...], top: int,
    max_n: int = len(TRIM_DESIGNATORS),
) -> tuple[int, list[Ids]] | None:  # fmt: skip
    """(n, the top answers' stock codes) of the brute force (module docstring), or None."""
    reduced = Catalog(
        catalog.path,
        *(tuple(p for p in getattr(catalog, t) if p.id not in without)
          for t in ("resistors", "capacitors", "opamps", "pots")),
    )  # fmt: skip
    for n in range(max_n + 1):
        ranked = []
        for changed in combinations(TRIM_DESIGNATORS, n):
            choices: dict[str, list[Part]] = {}
            for d in TRIM_DESIGNATORS:
                pool = _pool(reduced, d)
                if d in changed:
                    choices[d] = [p for p in pool if p.id != current[d]]
                else:
                    choices[d] = [p for p in pool if p.id == current[d]]
            for key, design in accepted_rows(spec, reduced, choices):
                ranked.append(((*key[:3], "U1" in changed, "C1" in changed, *key[3:]), design))
        ranked.sort(key=lambda item: item[0])
        out: list[Ids] = []
        for key, design in ranked:
            if len(out) >= top:
                break
            if box_covers(spec, design):
                out.append(tuple(key[5:]))
        if out:
            return n, out
    return None


def _ids(result: ReoptimiseResult) -> list[Ids]:
    return [tuple(c.parts[d].id for d in TRIM_DESIGNATORS) for c in result.candidates]


@cache
def small_design() -> dict[str, str]:
    result = design_trimmed(small_spec(), small_catalog(), time_limit_s=TIME_LIMIT_S)
    return {d: p.id for d, p in result.candidates[0].parts.items()}


def _with_stock(catalog: Catalog, part_id: str, stock: int) -> Catalog:
    def fix(table: tuple[Any, ...]) -> tuple[Any, ...]:
        return tuple(dataclasses.replace(p, stock=stock) if p.id == part_id else p for p in table)

    return Catalog(catalog.path, fix(catalog.resistors), fix(catalog.capacitors),
                   fix(catalog.opamps), fix(catalog.pots))  # fmt: skip


def _spec(boards: int = 1, top: int = 3) -> Spec:
    data = small_spec().model_dump()
    data["build"]["boards"] = boards
    data["ranking"]["top"] = top
    return parse_spec(data)


def test_a_design_that_still_passes_changes_nothing() -> None:
    spec, cat, current = _spec(), small_catalog(), small_design()
    result = reoptimise(spec, cat, current, time_limit_s=TIME_LIMIT_S, samples=SAMPLES)
    assert result.original.passes and result.search.proven_optimal
    assert result.candidates[0].changed == []
    assert _ids(result)[0] == tuple(current[d] for d in TRIM_DESIGNATORS)


@pytest.mark.parametrize("designator", TRIM_DESIGNATORS)
def test_each_part_unavailable_matches_the_brute_force(designator: str) -> None:
    spec, cat, current = _spec(), small_catalog(), small_design()
    without = (current[designator],)
    result = reoptimise(spec, cat, current, without=without, time_limit_s=TIME_LIMIT_S,
                        samples=SAMPLES)  # fmt: skip
    assert result.search.proven_optimal
    want = fewest_changes(spec, cat, current, without, spec.ranking.top)
    if want is None:  # the other op amp is too slow for this spec: nothing, in both
        assert not result.candidates and result.infeasible is not None
        return
    n, ids = want
    assert {len(c.changed) for c in result.candidates} == {n}
    assert all(designator in c.changed for c in result.candidates)
    assert _ids(result) == ids


def test_a_trimmer_that_runs_short_is_replaced_with_the_fewest_changes() -> None:
    """RV1's stock below the boards (the path that divided by zero before)."""
    spec, current = _spec(boards=10), small_design()
    cat = _with_stock(small_catalog(), current["RV1"], 4)
    result = reoptimise(spec, cat, current, time_limit_s=TIME_LIMIT_S, samples=SAMPLES)
    assert result.search.proven_optimal
    (short,) = result.shortfall
    assert (short.designator, short.needed, short.stock, short.short) == ("RV1", 10, 4, 6)
    assert any("stock 4 < 10" in r for r in result.original.reasons)
    want = fewest_changes(spec, cat, current, (), spec.ranking.top)
    assert want is not None
    assert _ids(result) == want[1]
    assert all("RV1" in c.changed for c in result.candidates)


def test_boards_beyond_every_stock_is_infeasible_with_numbers() -> None:
    spec, cat, current = _spec(), small_catalog(), small_design()
    result = reoptimise(spec, cat, current, boards=5000, time_limit_s=TIME_LIMIT_S)
    assert not result.candidates and result.search.proven_optimal
    assert result.infeasible is not None
    text = " ".join(result.infeasible.reasons)
    assert "5000 boards" in text and "has 1000" in text
    # every code whose stock is under 5000 x its pieces a board (the op amps hold 10,000)
    pieces = {d: getattr(cat.get(pid), "packages_per_board", 1) for d, pid in current.items()}
    short = {pid for d, pid in current.items() if cat.get(pid).stock < 5000 * pieces[d]}
    assert {s.id for s in result.shortfall} == short and "TU-J2" not in short
    assert all(s.needed >= 5000 and s.stock == 1000 for s in result.shortfall)


def test_a_cut_search_is_not_proven_and_not_infeasible() -> None:
    spec, cat, current = _spec(), small_catalog(), small_design()
    without = (current["R3"],)
    result = reoptimise(spec, cat, current, without=without, time_limit_s=1e-9)
    assert not result.search.proven_optimal
    assert result.infeasible is None


def test_a_trimmed_design_without_its_trimmer_is_refused_naming_the_field() -> None:
    current = dict(small_design())
    del current["RV1"]
    with pytest.raises(SpecError, match=r"parts\.RV1"):
        reoptimise(_spec(), small_catalog(), current)


# --------------------------------------------------------------------------------------------
# The bundled trimmed example, each of its parts short


@pytest.mark.parametrize("designator", TRIM_DESIGNATORS)
def test_each_part_of_the_trimmed_example_short(designator: str) -> None:
    """The example's rank 1 with one part's stock below the build: the answers change that
    designator, pass the corner brute force of ``test_trim`` at both margins, and no answer
    with fewer changes exists (brute force over every single-designator change)."""
    spec = example_spec()
    first = example_result().candidates[0]
    current = {d: p.id for d, p in first.parts.items()}
    boards = spec.build.boards
    cat = _with_stock(demo(), current[designator], boards - 1)
    t0 = time.perf_counter()
    result = reoptimise(spec, cat, current, time_limit_s=TIME_LIMIT_S, samples=SAMPLES)
    assert time.perf_counter() - t0 < TIME_LIMIT_S
    assert result.search.proven_optimal
    assert result.candidates, result.infeasible
    assert spec.trim is not None
    m = spec.trim.margin_pct / 100
    target = spec.target.target_hz
    n = len(result.candidates[0].changed)
    for c in result.candidates:
        assert designator in c.changed and len(c.changed) == n
        parts = {d: cat.get(p.id) for d, p in c.parts.items()}
        assert all(p.stock >= boards for p in parts.values())
        assert c.trim is not None
        d = design_of(c, cat)
        assert design_corners(d, spec, 1 - m).max() <= target <= design_corners(d, spec, m).min()
    if n > 1:
        assert fewest_changes(spec, cat, current, (), 1, max_n=1) is None


def test_cli_reoptimises_the_trimmed_example(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    first = example_result().candidates[0]
    path = tmp_path / "trimmed.json"
    path.write_text(json.dumps({
        "spec": example_spec().model_dump(mode="json"),
        "parts": {d: p.id for d, p in first.parts.items()},
        "wiper": first.trim.wiper_nominal if first.trim else 0.5,
    }), encoding="utf-8")  # fmt: skip
    argv = ["reoptimise", str(path), "--catalog", str(DEMO_DIR), "--json"]
    assert main([*argv, "--without", first.parts["RV1"].id]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["candidates"] and data["search"]["engine"] == "enumerate-trim"
    assert all("RV1" in c["changed"] for c in data["candidates"])
    # "no design meets the spec": exit 0 here, 3 where the CLI gives it its own code
    assert main([*argv, "--boards", "100000"]) in (0, 3)
    data = json.loads(capsys.readouterr().out)
    assert data["candidates"] == [] and data["infeasible"]["reasons"]
