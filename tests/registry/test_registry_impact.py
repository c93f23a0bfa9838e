"""``tristock impact`` against brute force: over-subscription, affected designs and the
joint fewest-changes proposal with its proof, on small in-memory catalogs.

Outside references, named beside each check:
- brute force over every (U1, R1, R2, R3, C1) of the small catalog for each affected design,
  scored by the search model (``build_model`` + ``evaluate``, the rows it accepts) and kept
  when the full model accepts it (``tristock.search.accepts``: the specs here guarantee
  ``nominal``, where that is the whole verdict); then every joint choice of those options,
  the stock of each code checked against the sum of the planned builds (boards x pieces per
  board, the DESIGN.md rule), and the fewest changed designators in total found by exhaustive
  search (common practice);
- resistor and capacitor values: the IEC 60063 E12 and E6 series as the ``eseries`` package
  gives them.

Stock codes are invented (TR-/TC-/TU- prefixes).
"""

from __future__ import annotations

import dataclasses
import itertools
from pathlib import Path

import eseries
import numpy as np
import pytest

from tristock.circuits.board import DESIGNATORS, Design, rails_from_supply, resolve
from tristock.designs.candidate import accepts
from tristock.registry import Registry
from tristock.registry.impact import ImpactSettings, impact
from tristock.registry.impact_report import ImpactReport
from tristock.registry.records import RevisionOut
from tristock.registry.release import draft_from, with_stock
from tristock.search.model import build_model
from tristock.search.rows import evaluate
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Resistor

E12_OHMS = [float(v) for v in eseries.erange(eseries.E12, 2.2e3, 50e3)]  # IEC 60063 via eseries
E6_FARADS = [float(v) for v in eseries.erange(eseries.E6, 4.7e-9, 0.23e-6)]
BOARDS = 10
#: Generous: no search here is cut by the clock (these are not timing tests).
TIME_LIMIT_S = 60.0


def small_catalog() -> Catalog:
    """E12 1 % resistors 2k2..47k, E6 C0G capacitors, a JFET dual and a single (invented)."""
    res = tuple(
        Resistor(f"TR-{v:g}", v, 1.0, 100.0, "E12", 0.1, "0603", 0.01, 1000) for v in E12_OHMS
    )
    caps = tuple(
        Capacitor(f"TC-{v * 1e9:.3g}N", v, "C0G", 5.0, 0.0, None, 50.0, "0805", 0.05, 1000)
        for v in E6_FARADS
    )
    common = {"supply_min_v": 7.0, "supply_max_v": 36.0, "swing_pos_v": 1.5, "swing_neg_v": 1.5,
              "output_a": 0.02}  # fmt: skip
    ops = (
        OpAmp("TU-JF2", 2, slew_v_per_us=13, gbw_hz=3e6, delay_s=1.2e-6, offset_v=3e-3,
              bias_a=3e-11, unit_cost=0.25, stock=1000, **common),
        OpAmp("TU-LN1", 1, slew_v_per_us=7, gbw_hz=10e6, delay_s=2e-6, offset_v=0.5e-3,
              bias_a=5e-8, unit_cost=0.30, stock=1000, **common),
    )  # fmt: skip
    return Catalog(Path("<memory>"), res, caps, ops)


RELEASED = {
    "osc-a": {"U1": "TU-JF2", "R1": "TR-2700", "R2": "TR-10000", "R3": "TR-10000", "C1": "TC-100N"},
    "osc-b": {"U1": "TU-JF2", "R1": "TR-3300", "R2": "TR-10000", "R3": "TR-22000", "C1": "TC-100N"},
    "osc-c": {"U1": "TU-JF2", "R1": "TR-2700", "R2": "TR-12000", "R3": "TR-47000", "C1": "TC-47N"},
}  # fmt: skip


def spec_around(parts: dict[str, str], catalog: Catalog) -> Spec:
    """A spec whose bands (±2 % frequency, ±5 % amplitude) hold the design's own nominal
    prediction: it passes as released."""
    d = resolve(parts, catalog)
    base = {"supply": {"positive_v": 12.0, "negative_v": -12.0}}
    rough = parse_spec({**base, "frequency": {"target_hz": 1e3, "tolerance_pct": 1.0},
                        "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 1.0}})  # fmt: skip
    osc = d.oscillator(rails_from_supply(rough.supply))
    return parse_spec(
        {
            **base,
            "frequency": {"target_hz": float(osc.frequency_hz), "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": float(osc.amplitude_vpp), "tolerance_pct": 5.0},
            "build": {"boards": BOARDS},
            "ranking": {"top": 5},
        }
    )


@pytest.fixture(scope="module")
def released(tmp_path_factory: pytest.TempPathFactory) -> list[RevisionOut]:
    catalog = small_catalog()
    reg = Registry.open(url=str(tmp_path_factory.mktemp("impact") / "registry.sqlite"))
    for name, parts in RELEASED.items():
        spec = spec_around(parts, catalog)
        data = {"spec": spec.model_dump(mode="json"), "parts": parts}
        reg.write(draft_from(name, data, catalog), source="release")
    active = reg.active()
    reg.close()
    return active


# --------------------------------------------------------------------------------------------
# Brute force


def pieces_of(design: Design) -> dict[str, int]:
    return dict(design.uses())


def options_by_brute_force(
    rev: RevisionOut, residual: Catalog
) -> list[tuple[int, dict[str, str], dict[str, int]]]:
    """Every (changes, parts, pieces) of one design that meets its spec and fits the residual
    stock on its own."""
    spec = parse_spec(rev.spec)
    model = build_model(spec, residual)
    nu, nr, nc = len(model.opamps), len(model.resistors), len(model.capacitors)
    grid = np.meshgrid(
        np.arange(nu), np.arange(nr), np.arange(nr), np.arange(nr), np.arange(nc), indexing="ij"
    )
    rows = evaluate(model, *(g.ravel().astype(np.int64) for g in grid))
    res, cap = model.resistors.parts, model.capacitors.parts
    out = []
    for n in range(len(rows)):
        d = Design(
            model.opamps[rows.u[n]].part,
            res[rows.i1[n]],
            res[rows.i2[n]],
            res[rows.i3[n]],
            cap[rows.j[n]],
        )
        pieces = pieces_of(d)
        if any(rev.boards * k > residual.get(c).stock for c, k in pieces.items()):
            continue
        if not accepts(spec, d):
            continue
        parts = {x: p.id for x, p in d.parts().items()}
        changes = sum(parts[x] != rev.parts[x] for x in DESIGNATORS)
        out.append((changes, parts, pieces))
    return sorted(out, key=lambda o: o[0])


_MINIMA: dict[tuple[tuple[str, int], ...], tuple[set[str], set[str], int | None]] = {}


def joint_minimum(
    active: list[RevisionOut], catalog: Catalog
) -> tuple[set[str], set[str], int | None]:
    """(over-subscribed codes, affected names, fewest total changes or None); computed once
    per stock (the released designs are the module's)."""
    key = tuple(sorted((p.id, p.stock) for p in catalog))
    if key not in _MINIMA:
        _MINIMA[key] = _joint_minimum(active, catalog)
    return _MINIMA[key]


def _joint_minimum(
    active: list[RevisionOut], catalog: Catalog
) -> tuple[set[str], set[str], int | None]:
    need: dict[str, int] = {}
    for rev in active:
        for code, k in rev.pieces.items():
            need[code] = need.get(code, 0) + rev.boards * k
    over = {c for c, n in need.items() if n > (catalog.get(c).stock if c in catalog else 0)}
    hit = {r.name for r in active if over & set(r.pieces)}
    left = {p.id: p.stock for p in catalog}
    for rev in active:
        if rev.name not in hit:
            for code, k in rev.pieces.items():
                left[code] = left.get(code, 0) - rev.boards * k
    residual = with_stock(catalog, {c: max(v, 0) for c, v in left.items() if c in catalog})
    choices = [(r, options_by_brute_force(r, residual)) for r in active if r.name in hit]
    best: int | None = None
    for combo in itertools.product(*(opts for _, opts in choices)):
        total = sum(o[0] for o in combo)
        if best is not None and total >= best:
            continue
        used: dict[str, int] = {}
        for (rev, _), (_, _, pieces) in zip(choices, combo, strict=True):
            for code, k in pieces.items():
                used[code] = used.get(code, 0) + rev.boards * k
        if all(n <= left.get(c, 0) for c, n in used.items()):
            best = total
    return over, hit, best


# --------------------------------------------------------------------------------------------


def run(active: list[RevisionOut], catalog: Catalog, top: int = 5) -> ImpactReport:
    settings = ImpactSettings(top=top, time_limit_s=TIME_LIMIT_S, joint_time_limit_s=TIME_LIMIT_S)
    return impact(active, catalog, settings)


def check_allocation(report: ImpactReport, active: list[RevisionOut], catalog: Catalog) -> None:
    """The proposal's designs meet their specs and all builds together fit the stock."""
    assert report.proposal is not None
    after = {d.name: d.design_after["parts"] for d in report.proposal.designs}
    used: dict[str, int] = {}
    for rev in active:
        parts = after.get(rev.name, rev.parts)
        d = resolve(parts, catalog)
        assert accepts(parse_spec(rev.spec), d)  # the full model at nominal values
        for code, k in pieces_of(d).items():
            used[code] = used.get(code, 0) + rev.boards * k
    assert all(n <= catalog.get(c).stock for c, n in used.items())


SCENARIOS = {
    "shared capacitor covers one build": {"TC-100N": 10},
    "op amp covers two of three builds": {"TU-JF2": 25},
    "code at two designators short": {"TR-10000": 25},
    "two codes short at once": {"TC-100N": 10, "TR-2700": 10},
    "replacements scarce too": {"TC-100N": 0, "TC-150N": 10, "TC-68N": 10},
}


@pytest.mark.parametrize("stock", SCENARIOS.values(), ids=SCENARIOS.keys())
def test_joint_proposal_is_the_brute_force_minimum(
    released: list[RevisionOut], stock: dict[str, int]
) -> None:
    catalog = with_stock(small_catalog(), stock)
    over, hit, minimum = joint_minimum(released, catalog)
    report = run(released, catalog)
    assert {o.id for o in report.over_subscribed} == over
    assert {a.name for a in report.affected} == hit
    assert minimum is not None
    assert report.proposal is not None
    assert report.proposal.proven
    assert report.proposal.total_changes == minimum
    assert report.proposal.lower_bound == minimum
    check_allocation(report, released, catalog)


def test_fewer_answers_per_design_never_claim_a_false_proof(released: list[RevisionOut]) -> None:
    """With one answer per re-optimisation the pool may miss the joint optimum; the proposal
    is then still valid, never below the minimum, and claims a proof only when it has it."""
    for stock in SCENARIOS.values():
        catalog = with_stock(small_catalog(), stock)
        _, _, minimum = joint_minimum(released, catalog)
        report = run(released, catalog, top=1)
        assert report.proposal is not None and minimum is not None
        assert report.proposal.total_changes >= minimum
        if report.proposal.proven:
            assert report.proposal.total_changes == minimum
        check_allocation(report, released, catalog)


def test_a_part_gone_from_the_catalog_is_over_subscribed(released: list[RevisionOut]) -> None:
    """TR-2700 deleted from the tables: both designs using it are affected and change R1."""
    full = small_catalog()
    kept = tuple(r for r in full.resistors if r.id != "TR-2700")
    catalog = Catalog(full.path, kept, full.capacitors, full.opamps)
    over, hit, minimum = joint_minimum(released, catalog)
    report = run(released, catalog)
    assert over == {"TR-2700"} and hit == {"osc-a", "osc-c"}
    assert report.over_subscribed[0].stock == 0
    assert report.proposal is not None and report.proposal.proven
    assert report.proposal.total_changes == minimum
    check_allocation(report, released, catalog)


def test_nothing_over_subscribed_lists_nothing(released: list[RevisionOut]) -> None:
    report = run(released, small_catalog())
    assert report.over_subscribed == [] and report.affected == []
    assert report.proposal is None and report.work == []
    assert "nothing is over-subscribed" in report.message


def test_no_proposal_exists_when_a_design_cannot_be_built(released: list[RevisionOut]) -> None:
    """With no op amp at all on the shelf nothing can be built: proven, no proposal."""
    catalog = with_stock(small_catalog(), {"TU-JF2": 0, "TU-LN1": 0})
    report = run(released, catalog)
    assert report.proposal is None
    assert report.no_proposal_reason is not None
    assert report.no_proposal_reason.startswith("no proposal exists")


def test_what_if_overrides_stock_in_memory(released: list[RevisionOut]) -> None:
    catalog = small_catalog()
    report = impact(
        released, catalog, ImpactSettings(time_limit_s=TIME_LIMIT_S), {"TC-100N": (1000, 10)}
    )
    assert [o.id for o in report.over_subscribed] == ["TC-100N"]
    assert report.what_if[0].stock_after == 10
    assert catalog.get("TC-100N").stock == 1000  # untouched
    assert dataclasses.asdict(catalog.get("TC-100N"))["stock"] == 1000
