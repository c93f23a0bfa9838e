"""Released comparator-IC designs across shared stock (``tristock impact``): the release keeps
the board's circuit, U1 counts one piece a board (the comparator U2 does the comparing), and a
code short for two planned builds is fixed with one changed designator in total; a set-duty
design whose steering diode runs short is fixed in one design.

References: the minimum is 1 because an over-subscribed code forces at least one change and
the re-optimisation finds a 1-change answer (its fewest count is checked against brute force
in tests/designs/test_reoptimise_variants.py); stock arithmetic (boards x pieces per board, one
op-amp channel on a comparator board) is the DESIGN.md rule (common practice). The board is
the bundled comparator example's best on the demo stock room (invented parts).
"""

from __future__ import annotations

from functools import cache

import pytest

from tristock.circuits import TOPOLOGIES
from tristock.designs import design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.export.designfile import parse_design
from tristock.registry import Registry
from tristock.registry.impact import ImpactSettings, impact
from tristock.registry.records import RevisionOut
from tristock.registry.release import draft_from, with_stock
from tristock.spec.loading import load_spec, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog

CIRCUIT = "comparator_schmitt"
NAMES = ("sweep-a", "sweep-b")
TIME_LIMIT_S = 60.0


@cache
def example() -> tuple[Spec, Catalog, dict[str, str]]:
    """The comparator example's spec, the demo stock room and its rank-1 board."""
    spec = load_spec(example_spec_path("comparator"))
    catalog = load_catalog(demo_catalog_dir())
    best = design(spec, catalog, time_limit_s=TIME_LIMIT_S, samples=500).candidates[0]
    return spec, catalog, {d: p.id for d, p in best.parts.items()}


@pytest.fixture(scope="module")
def released(tmp_path_factory: pytest.TempPathFactory) -> list[RevisionOut]:
    """The example's best board released twice (its spec's 40 boards each)."""
    spec, catalog, parts = example()
    reg = Registry.open(url=str(tmp_path_factory.mktemp("variants") / "registry.sqlite"))
    for name in NAMES:
        data = {"spec": spec.model_dump(mode="json"), "parts": parts, "topology": CIRCUIT}
        reg.write(draft_from(name, data, catalog), source="release")
    active = reg.active()
    reg.close()
    return active


def test_a_release_keeps_the_circuit_and_counts_one_op_amp_channel(
    released: list[RevisionOut],
) -> None:
    _, catalog, parts = example()
    rev = released[0]
    assert rev.design["topology"] == CIRCUIT and rev.parts == parts
    u1 = catalog.get(parts["U1"])
    assert getattr(u1, "channels", None) == 1  # a single: two pieces on the op-amp loop
    assert rev.pieces[parts["U1"]] == 1
    spec, board = parse_design(rev.design_file(), catalog)
    assert board.topology is TOPOLOGIES[CIRCUIT] and spec.build.boards == rev.boards


def test_a_short_code_changes_one_design_by_one_designator(released: list[RevisionOut]) -> None:
    _, full, parts = example()
    boards = released[0].boards
    u1, r3 = parts["U1"], parts["R3"]
    # R3's code covers one build, not two; U1 exactly both (one piece a board)
    catalog = with_stock(full, {r3: boards + boards // 2, u1: 2 * boards})
    settings = ImpactSettings(top=5, time_limit_s=TIME_LIMIT_S, joint_time_limit_s=TIME_LIMIT_S)
    report = impact(released, catalog, settings)
    assert [o.id for o in report.over_subscribed] == [r3]
    assert {a.name for a in report.affected} == set(NAMES)
    proposal = report.proposal
    assert proposal is not None and proposal.proven
    assert proposal.total_changes == proposal.lower_bound == 1
    changed = [d for d in proposal.designs if d.changed]
    assert len(changed) == 1 and changed[0].changed == ["R3"]
    after = changed[0].design_after
    assert after["topology"] == CIRCUIT and after["parts"]["R3"] != r3
    rev = next(r for r in released if r.name == changed[0].name)
    spec, board = parse_design({"spec": rev.spec, **after}, catalog)
    assert spec == parse_spec(rev.spec)
    assert board.topology is TOPOLOGIES[CIRCUIT] and board.uses()[u1] == 1


@pytest.fixture(scope="module")
def released_duty(tmp_path_factory: pytest.TempPathFactory) -> list[RevisionOut]:
    """The set-duty example's best board released twice (its spec's 60 boards each)."""
    spec = load_spec(example_spec_path("duty"))
    catalog = load_catalog(demo_catalog_dir())
    best = design(spec, catalog, time_limit_s=TIME_LIMIT_S, samples=500).candidates[0]
    parts = {d: p.id for d, p in best.parts.items()}
    reg = Registry.open(url=str(tmp_path_factory.mktemp("duty") / "registry.sqlite"))
    for name in ("ramp-a", "ramp-b"):
        data = {"spec": spec.model_dump(mode="json"), "parts": parts, "topology": "duty_schmitt"}
        reg.write(draft_from(name, data, catalog), source="release")
    active = reg.active()
    reg.close()
    return active


def test_a_short_steering_diode_changes_one_set_duty_design(
    released_duty: list[RevisionOut],
) -> None:
    """The diode D3 = D4 (two pieces a board) short for the second build: one design changes
    its diode pair, and with it whatever the other diode's drop needs (the fewest count is the
    joint search's proven lower bound; re-optimisation's own against brute force in
    tests/designs/test_duty_search_exact.py)."""
    catalog = load_catalog(demo_catalog_dir())
    rev = released_duty[0]
    diode = rev.parts["D3"]
    assert rev.parts["D4"] == diode and rev.pieces[diode] == 2
    short = with_stock(catalog, {diode: 3 * rev.boards})  # 2 a board: one build and a half
    settings = ImpactSettings(top=5, time_limit_s=TIME_LIMIT_S, joint_time_limit_s=TIME_LIMIT_S)
    report = impact(released_duty, short, settings)
    assert [o.id for o in report.over_subscribed] == [diode]
    proposal = report.proposal
    assert proposal is not None and proposal.proven
    assert proposal.total_changes == proposal.lower_bound
    changed = [d for d in proposal.designs if d.changed]
    assert len(changed) == 1 and {"D3", "D4"} <= set(changed[0].changed)
    after = changed[0].design_after
    assert after["topology"] == "duty_schmitt"
    assert after["parts"]["D3"] == after["parts"]["D4"] != diode
