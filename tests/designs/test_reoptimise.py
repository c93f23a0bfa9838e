"""Re-optimisation (designs.reoptimise): fewest changed designators, then best by the ranking.

Outside references, named beside each check:
- plain brute force over every (U1, R1, R2, R3, C1) of small catalogs: each combination is
  scored by the search model (``build_model`` + ``evaluate`` on the catalog without the
  unavailable parts) and re-checked by the full model (``passes(spec, design, analyse(...))``); its
  change count is a plain count of designators whose stock code differs (common practice);
- resistor and capacitor values of the generated catalogs come from the IEC 60063 tables as
  given by the ``eseries`` package;
- stock arithmetic (pieces = boards x uses, a single-channel op amp counted twice for U1) is
  the DESIGN.md rule, checked against hand counts (common practice).

All stock codes are invented (TR-/TC-/TU- prefixes); every catalog is built in memory except
the bundled demo catalog.
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Sequence
from functools import cache
from pathlib import Path
from typing import Any

import eseries
import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, note, settings
from hypothesis import strategies as st

from tristock.analysis.bundle import analyse
from tristock.circuits.board import DESIGNATORS, Design, rails_from_supply, resolve
from tristock.cli import main
from tristock.designs import design
from tristock.designs.candidate import passes, warnings_for
from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import ReoptimiseResult, Shortfall
from tristock.designs.shortfall import shortfall
from tristock.search.model import build_model
from tristock.search.rows import evaluate, rank_key
from tristock.spec.loading import SpecError, load_spec, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Resistor

REPO = Path(__file__).resolve().parents[2]
DEMO_CATALOG = REPO / "catalogs" / "demo"
DEMO_SPEC = REPO / "src" / "tristock" / "examples" / "demo.toml"
#: Monte Carlo samples for every full-model check here; reoptimise gets the same count and
#: the same (default) seed, so both sides see the same yield.
SAMPLES = 256
#: Generous, so no answer here is cut short by the clock (these are not timing tests).
TIME_LIMIT_S = 60.0

Ids = tuple[str, str, str, str, str]


# --------------------------------------------------------------------------------------------
# Building parts and catalogs in memory


def resistor(
    code: str, value: float, *, tol: float = 1.0, cost: float = 0.01, stock: int = 1000
) -> Resistor:
    return Resistor(code, value, tol, 100.0, "E12", 0.1, "0603", cost, stock)


def capacitor(
    code: str,
    value: float,
    *,
    dielectric: str = "C0G",
    tol: float = 5.0,
    cost: float = 0.05,
    stock: int = 1000,
) -> Capacitor:
    tempco = 0.0 if dielectric == "C0G" else -200.0
    return Capacitor(code, value, dielectric, tol, tempco, None, 50.0, "0805", cost, stock)


#: Invented op-amp classes (typical, not any real part): JFET dual, slow bipolar dual, fast
#: single (two packages per board) and a rail-to-rail-output dual.
OPAMP_TEMPLATES: dict[str, dict[str, float]] = {
    "TU-JF2": {
        "channels": 2, "supply_min_v": 7, "supply_max_v": 36, "swing_pos_v": 1.5,
        "swing_neg_v": 1.5, "slew_v_per_us": 13, "gbw_hz": 3e6, "delay_s": 1.2e-6,
        "offset_v": 3e-3, "bias_a": 3e-11, "output_a": 0.02, "unit_cost": 0.25,
    },
    "TU-BP2": {
        "channels": 2, "supply_min_v": 10, "supply_max_v": 36, "swing_pos_v": 1.5,
        "swing_neg_v": 1.5, "slew_v_per_us": 0.5, "gbw_hz": 1e6, "delay_s": 6e-6,
        "offset_v": 2e-3, "bias_a": 8e-8, "output_a": 0.025, "unit_cost": 0.16,
    },
    "TU-LN1": {
        "channels": 1, "supply_min_v": 10, "supply_max_v": 36, "swing_pos_v": 1.3,
        "swing_neg_v": 1.3, "slew_v_per_us": 7, "gbw_hz": 10e6, "delay_s": 2e-6,
        "offset_v": 0.5e-3, "bias_a": 5e-8, "output_a": 0.03, "unit_cost": 0.30,
    },
    "TU-RO2": {
        "channels": 2, "supply_min_v": 4.5, "supply_max_v": 36, "swing_pos_v": 0.1,
        "swing_neg_v": 0.1, "slew_v_per_us": 5, "gbw_hz": 10e6, "delay_s": 0.8e-6,
        "offset_v": 0.5e-3, "bias_a": 1e-11, "output_a": 0.03, "unit_cost": 0.60,
    },
}  # fmt: skip


def opamp(code: str, *, stock: int = 1000, cost: float | None = None) -> OpAmp:
    row = dict(OPAMP_TEMPLATES[code])
    if cost is not None:
        row["unit_cost"] = cost
    channels = int(row.pop("channels"))
    return OpAmp(code, channels, stock=stock, **row)


def catalog_of(
    resistors: Sequence[Resistor], capacitors: Sequence[Capacitor], opamps: Sequence[OpAmp]
) -> Catalog:
    return Catalog(Path("<memory>"), tuple(resistors), tuple(capacitors), tuple(opamps))


def with_stock(catalog: Catalog, stock: dict[str, int]) -> Catalog:
    """The catalog with the stock of some parts replaced."""

    def fix(parts: Sequence[Any]) -> tuple[Any, ...]:
        return tuple(
            dataclasses.replace(p, stock=stock[p.id]) if p.id in stock else p for p in parts
        )

    return Catalog(
        catalog.path, fix(catalog.resistors), fix(catalog.capacitors), fix(catalog.opamps)
    )


def without_parts(catalog: Catalog, gone: Sequence[str]) -> Catalog:
    return Catalog(
        catalog.path,
        tuple(r for r in catalog.resistors if r.id not in gone),
        tuple(c for c in catalog.capacitors if c.id not in gone),
        tuple(o for o in catalog.opamps if o.id not in gone),
    )


def make_spec(
    target_hz: float,
    amplitude_vpp: float,
    *,
    f_tol: float = 5.0,
    a_tol: float = 8.0,
    boards: int = 10,
    guarantee: str = "nominal",
    by: str = "balanced",
    top: int = 3,
    rail_tol: float = 0.0,
    limits: dict[str, Any] | None = None,
) -> Spec:
    return parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": rail_tol},
            "frequency": {"target_hz": target_hz, "tolerance_pct": f_tol},
            "triangle": {"amplitude_vpp": amplitude_vpp, "tolerance_pct": a_tol},
            "build": {"boards": boards},
            "limits": {"guarantee": guarantee, "min_yield": 0.9, **(limits or {})},
            "ranking": {"by": by, "top": top},
        }
    )


def ids_of(parts: dict[str, Any]) -> Ids:
    """Stock codes in designator order from a mapping of designator -> part or PartOut."""
    return (parts["U1"].id, parts["R1"].id, parts["R2"].id, parts["R3"].id, parts["C1"].id)


def full_check(spec: Spec, d: Design) -> bool:
    """The full model's verdict, with the same samples and seed reoptimise uses, and no
    check of error severity (a board that fails one is not offered: README,
    "Re-optimisation": "no check of error severity, then the guarantee")."""
    if any(w.severity == "error" for w in warnings_for(d, spec)):
        return False
    return passes(spec, d, analyse(d, spec, samples=SAMPLES))


# --------------------------------------------------------------------------------------------
# Brute force


@dataclasses.dataclass
class BruteForce:
    """Every combination of the reduced catalog the search model accepts, by change count."""

    min_changes: int | None  # None: nothing passes both models
    best: list[Ids]  # the first ``top`` passing answers with min_changes, in rank order
    passing_keys: dict[Ids, bool]  # full-model verdicts computed so far


def brute_force(
    spec: Spec, catalog: Catalog, current: dict[str, str], without: Sequence[str]
) -> BruteForce:
    """Fewest changes and the best answers, by enumerating every (U1, R1, R2, R3, C1).

    Rank order: the search model's rank_key with, after the two scores, a design keeping U1
    before one that changes it, then one keeping C1 (the documented tie rule).
    """
    model = build_model(spec, without_parts(catalog, without))
    nu, nr, nc = len(model.opamps), len(model.resistors), len(model.capacitors)
    grid = np.meshgrid(
        np.arange(nu), np.arange(nr), np.arange(nr), np.arange(nr), np.arange(nc), indexing="ij"
    )
    u, i1, i2, i3, j = (g.ravel().astype(np.int64) for g in grid)
    rows = evaluate(model, u, i1, i2, i3, j)
    res, cap = model.resistors.parts, model.capacitors.parts
    by_count: dict[int, list[tuple[tuple[Any, ...], Ids, Design]]] = {}
    for n in range(len(rows)):
        d = Design(
            model.opamps[rows.u[n]].part,
            res[rows.i1[n]],
            res[rows.i2[n]],
            res[rows.i3[n]],
            cap[rows.j[n]],
        )
        ids = ids_of(d.parts())
        changed = {x for x, pid in zip(DESIGNATORS, ids, strict=True) if current[x] != pid}
        key = rank_key(model, rows, n)
        order = (key[0], key[1], "U1" in changed, "C1" in changed, *key[2:])
        by_count.setdefault(len(changed), []).append((order, ids, d))
    verdicts: dict[Ids, bool] = {}
    for count in sorted(by_count):
        found: list[Ids] = []
        for _, ids, d in sorted(by_count[count], key=lambda item: item[0]):
            verdicts[ids] = full_check(spec, d)
            if verdicts[ids]:
                found.append(ids)
                if len(found) == spec.ranking.top:
                    break
        if found:
            return BruteForce(count, found, verdicts)
    return BruteForce(None, [], verdicts)


# --------------------------------------------------------------------------------------------
# Random small catalogs

E12_OHMS = [float(v) for v in eseries.erange(eseries.E12, 1e3, 100e3)]  # IEC 60063 via eseries
E6_FARADS = [float(v) for v in eseries.erange(eseries.E6, 4.7e-9, 1.01e-6)]
SCENARIO_FARADS = [v for v in E6_FARADS if v < 0.11e-6]


@dataclasses.dataclass
class Scenario:
    spec: Spec
    catalog: Catalog
    current: dict[str, str]
    without: list[str]

    def __repr__(self) -> str:
        """Everything needed to rebuild the case by hand (printed when an example fails)."""
        parts = [
            f"{p.id}={getattr(p, 'value', 0):g}/{getattr(p, 'tolerance_pct', 0):g}%/stock {p.stock}"
            for p in self.catalog
        ]
        return (
            f"Scenario(spec={self.spec.model_dump_json()}, current={self.current}, "
            f"without={self.without}, parts={parts})"
        )


@st.composite
def scenarios(draw: st.DrawFn) -> Scenario:
    """A small catalog, a design that met a spec built around it, then stock trouble.

    The spec's targets are the full model's prediction for a planted design, moved by up to
    half the band, so the planted design usually meets it. Then some parts go (``without``)
    and the stock of others drops: below the build, or enough for one position but not two.
    """
    boards = 10
    r_values = draw(st.lists(st.sampled_from(E12_OHMS), min_size=6, max_size=12, unique=True))
    resistors = [
        resistor(
            f"TR-{n}",
            v,
            tol=draw(st.sampled_from([1.0, 0.1, 5.0])),
            cost=draw(st.sampled_from([0.004, 0.01, 0.05])),
        )
        for n, v in enumerate(sorted(r_values))
    ]
    # A second code for some values (another tolerance class): one-for-one replacements exist.
    for n in draw(st.sets(st.integers(0, len(resistors) - 1), max_size=6)):
        r = resistors[n]
        resistors.append(dataclasses.replace(r, id=f"{r.id}B", tolerance_pct=0.5))
    c_values = draw(st.lists(st.sampled_from(SCENARIO_FARADS), min_size=2, max_size=5, unique=True))
    capacitors = [
        capacitor(
            f"TC-{n}",
            v,
            dielectric=draw(st.sampled_from(["C0G", "PP"])),
            tol=draw(st.sampled_from([2.0, 1.0, 5.0])),
            cost=draw(st.sampled_from([0.05, 0.3])),
        )
        for n, v in enumerate(sorted(c_values))
    ]
    for n in draw(st.sets(st.integers(0, len(capacitors) - 1), max_size=2)):
        c = capacitors[n]
        capacitors.append(dataclasses.replace(c, id=f"{c.id}B", dielectric="C0G", tempco_ppm=0.0))
    op_codes = draw(
        st.lists(st.sampled_from(sorted(OPAMP_TEMPLATES)), min_size=1, max_size=3, unique=True)
    )
    opamps = [opamp(code) for code in op_codes]

    # The planted design: a threshold ratio k = R1/R2 in 0.1..0.7 where the values allow it;
    # R3 may repeat R1's or R2's stock code.
    pairs = [(r1, r2) for r1 in resistors for r2 in resistors if 0.1 <= r1.value / r2.value <= 0.7]
    r1, r2 = draw(st.sampled_from(pairs)) if pairs else (resistors[0], resistors[-1])
    r3 = draw(st.sampled_from([*resistors, r1, r2]))
    u1 = draw(st.sampled_from(opamps))
    base = make_spec(1e3, 1.0)

    def frequency(c1: Capacitor) -> float:
        osc = Design(u1, r1, r2, r3, c1).oscillator(rails_from_supply(base.supply))
        return float(osc.frequency_hz)

    audio = [c for c in capacitors if 100 <= frequency(c) <= 20e3]
    planted = Design(u1, r1, r2, r3, draw(st.sampled_from(audio or capacitors)))
    osc = planted.oscillator(rails_from_supply(base.supply))
    f0, a0 = float(osc.frequency_hz), float(osc.amplitude_vpp)
    if not (math.isfinite(f0) and math.isfinite(a0) and 0 < a0 < 20 and 0 < f0 < 1e6):
        f0, a0 = 1e3, 5.0
    f_tol = draw(st.sampled_from([5.0, 10.0, 3.0]))
    a_tol = draw(st.sampled_from([5.0, 10.0]))
    shift = st.floats(-0.5, 0.5, allow_nan=False)
    limit_choices: list[dict[str, Any]] = [
        {},
        {},
        {},
        {"dielectrics": ["C0G"]},
        {"max_cost": round(planted.cost_per_board, 3)},
    ]
    spec = make_spec(
        f0 * (1 + draw(shift) * f_tol / 100),
        a0 * (1 + draw(shift) * a_tol / 100),
        f_tol=f_tol,
        a_tol=a_tol,
        boards=boards,
        guarantee=draw(st.sampled_from(["nominal", "nominal", "nominal", "worst_case", "yield"])),
        by=draw(st.sampled_from(["balanced", "frequency_error", "cost", "yield"])),
        top=2,
        limits=draw(st.sampled_from(limit_choices)),
    )
    current = dict(zip(DESIGNATORS, ids_of(planted.parts()), strict=True))

    # Stock trouble: the design's own parts more often than others.
    own = sorted(set(current.values()))
    everything = sorted([r.id for r in resistors] + [c.id for c in capacitors] + op_codes)
    lowered = draw(st.lists(st.sampled_from(own), max_size=1))
    lowered += draw(st.lists(st.sampled_from(everything), max_size=3, unique=True))
    level = st.sampled_from([0, 5, 15])  # none, short for one position, enough for one of two
    catalog = with_stock(
        catalog_of(resistors, capacitors, opamps), {pid: draw(level) for pid in lowered}
    )
    without = draw(st.lists(st.sampled_from(everything), max_size=2, unique=True))
    if draw(st.booleans()):
        without.append(draw(st.sampled_from(own)))
    return Scenario(spec, catalog, current, sorted(set(without)))


@settings(
    max_examples=25,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
@given(scenarios())
def test_fewest_changes_match_brute_force(sc: Scenario) -> None:
    """reoptimise finds brute force's minimal change count and its best answers, in order."""
    result = reoptimise(
        sc.spec,
        sc.catalog,
        sc.current,
        without=sc.without,
        time_limit_s=TIME_LIMIT_S,
        samples=SAMPLES,
    )
    expected = brute_force(sc.spec, sc.catalog, sc.current, sc.without)
    note(repr(sc))
    note(f"reoptimise: {[(c.changed, ids_of(c.parts)) for c in result.candidates]}")
    note(f"original: {result.original}")
    note(f"brute force: {expected.min_changes} {expected.best}")
    event(f"min changes: {expected.min_changes}")
    event(f"candidates: {len(result.candidates)}")
    assert result.search.proven_optimal
    got = [ids_of(c.parts) for c in result.candidates]
    if expected.min_changes is None:
        assert got == []
        assert result.infeasible is not None and result.infeasible.reasons
        return
    assert result.infeasible is None
    assert {len(c.changed) for c in result.candidates} == {expected.min_changes}
    assert got == expected.best
    for c in result.candidates:
        differs = [x for x in DESIGNATORS if c.parts[x].id != sc.current[x]]
        assert c.changed == differs
        assert [(ch.designator, ch.from_id, ch.to_id) for ch in c.changes] == [
            (x, sc.current[x], c.parts[x].id) for x in differs
        ]
    assert result.original.passes == (expected.min_changes == 0)


# --------------------------------------------------------------------------------------------
# The demo catalog: one part out of stock in each designator in turn


@cache
def demo_catalog() -> Catalog:
    return load_catalog(DEMO_CATALOG)


@cache
def demo_spec() -> Spec:
    """The bundled demo request, asking for three answers to keep the full-model checks few."""
    spec = load_spec(DEMO_SPEC)
    return spec.model_copy(update={"ranking": spec.ranking.model_copy(update={"top": 3})})


@cache
def demo_design() -> dict[str, str]:
    """The demo's best design, as the search itself picks it (no stock codes written here)."""
    found = design(demo_spec(), demo_catalog(), engine="enumerate", samples=SAMPLES)
    assert found.candidates, "the demo spec must have a design on the demo catalog"
    return dict(zip(DESIGNATORS, ids_of(found.candidates[0].parts), strict=True))


def assert_valid_repair(
    result: ReoptimiseResult, spec: Spec, current: dict[str, str], gone: str
) -> None:
    """Every answer passes the full model, changes ``gone`` and keeps what it does not list."""
    if not result.candidates:
        assert result.infeasible is not None and result.infeasible.reasons
        assert all(isinstance(r, str) and r for r in result.infeasible.reasons)
        return
    for c in result.candidates:
        assert gone in c.changed
        for x in DESIGNATORS:
            if x not in c.changed:
                assert c.parts[x].id == current[x], x
            else:
                assert c.parts[x].id != current[x], x
        d = resolve({x: c.parts[x].id for x in DESIGNATORS}, demo_catalog())
        assert full_check(spec, d)
    counts = [len(c.changed) for c in result.candidates]
    assert len(set(counts)) == 1


@pytest.mark.parametrize("designator", DESIGNATORS)
def test_demo_part_withdrawn(designator: str) -> None:
    spec, current = demo_spec(), demo_design()
    gone = current[designator]
    result = reoptimise(
        spec, demo_catalog(), current, without=[gone], samples=SAMPLES, time_limit_s=TIME_LIMIT_S
    )
    assert not result.original.passes
    assert any(gone in r and "unavailable" in r for r in result.original.reasons)
    assert_valid_repair(result, spec, current, designator)
    for c in result.candidates:
        assert gone not in ids_of(c.parts)
        why = next(ch.why for ch in c.changes if ch.designator == designator)
        assert gone in why


@pytest.mark.parametrize("designator", DESIGNATORS)
def test_demo_part_short_of_stock(designator: str) -> None:
    spec, current = demo_spec(), demo_design()
    boards = spec.build.boards
    gone = current[designator]
    catalog = with_stock(demo_catalog(), {gone: boards - 1})
    result = reoptimise(spec, catalog, current, samples=SAMPLES, time_limit_s=TIME_LIMIT_S)
    assert not result.original.passes
    assert gone in [s.id for s in result.shortfall]
    assert_valid_repair(result, spec, current, designator)


def test_demo_design_that_passes_needs_no_change() -> None:
    spec, current = demo_spec(), demo_design()
    result = reoptimise(spec, demo_catalog(), current, samples=SAMPLES, time_limit_s=TIME_LIMIT_S)
    assert result.original.passes
    assert result.original.reasons == []
    assert result.shortfall == []
    assert result.candidates and result.candidates[0].changed == []
    assert ids_of(result.candidates[0].parts) == tuple(current[x] for x in DESIGNATORS)
    assert all(c.changed == [] for c in result.candidates)  # only the one design has 0 changes
    assert len(result.candidates) == 1


# --------------------------------------------------------------------------------------------
# Small hand-made catalogs: rules one at a time


def small_catalog() -> Catalog:
    """E12 1 % resistors 1k..100k, two 10 kΩ codes, C0G capacitors, one dual and one single."""
    resistors = [resistor(f"TR-{v:g}", v) for v in E12_OHMS]
    resistors.append(resistor("TR-10000B", 10e3, tol=0.5))
    capacitors = [capacitor(f"TC-{v * 1e9:.3g}N", v) for v in E6_FARADS]
    return catalog_of(resistors, capacitors, [opamp("TU-JF2"), opamp("TU-LN1")])


def small_design() -> tuple[Spec, dict[str, str]]:
    """A spec built around one design of ``small_catalog`` whose R2 and R3 share a code."""
    current = {"U1": "TU-JF2", "R1": "TR-2700", "R2": "TR-10000", "R3": "TR-10000", "C1": "TC-100N"}
    cat = small_catalog()
    d = resolve(current, cat)
    base = make_spec(1e3, 5.0)
    osc = d.oscillator(rails_from_supply(base.supply))
    spec = make_spec(float(osc.frequency_hz), float(osc.amplitude_vpp), f_tol=2.0, a_tol=5.0)
    assert full_check(spec, d)
    return spec, current


def test_part_no_longer_in_catalog_is_unavailable() -> None:
    spec, current = small_design()
    current = {**current, "R1": "TR-GONE"}
    result = reoptimise(spec, small_catalog(), current, samples=SAMPLES)
    assert result.original.predicted is None
    assert not result.original.passes
    assert any("TR-GONE" in r and "no longer in the catalog" in r for r in result.original.reasons)
    assert [s.id for s in result.shortfall] == ["TR-GONE"]
    assert result.candidates
    for c in result.candidates:
        assert "R1" in c.changed
        change = next(ch for ch in c.changes if ch.designator == "R1")
        assert change.from_id == "TR-GONE" and "TR-GONE" in change.why


def test_unknown_without_id_names_the_field() -> None:
    spec, current = small_design()
    with pytest.raises(SpecError) as err:
        reoptimise(spec, small_catalog(), current, without=["TR-10000", "TX-NOPE"])
    assert len(err.value.lines) == 1
    assert err.value.lines[0].startswith("without:") and "TX-NOPE" in err.value.lines[0]


def test_missing_designator_names_the_field() -> None:
    spec, current = small_design()
    del current["C1"]
    with pytest.raises(SpecError) as err:
        reoptimise(spec, small_catalog(), current)
    assert err.value.lines == ["parts.C1: missing"]


def test_shortfall_counts_shared_codes_and_single_op_amps() -> None:
    """R2 and R3 share a code (two pieces a board); U1 is single-channel (two packages)."""
    current = {"U1": "TU-LN1", "R1": "TR-2700", "R2": "TR-10000", "R3": "TR-10000", "C1": "TC-100N"}
    cat = with_stock(
        small_catalog(), {"TU-LN1": 150, "TR-10000": 150, "TR-2700": 100, "TC-100N": 99}
    )
    # Hand counts for 100 boards: TU-LN1 2 x 100 = 200 > 150; TR-10000 2 x 100 = 200 > 150;
    # TR-2700 exactly 100 (not short); TC-0.1 100 > 99.
    assert shortfall(cat, current, 100) == [
        Shortfall(designator="U1", id="TU-LN1", needed=200, stock=150, short=50),
        Shortfall(designator="R2", id="TR-10000", needed=200, stock=150, short=50),
        Shortfall(designator="C1", id="TC-100N", needed=100, stock=99, short=1),
    ]
    assert shortfall(cat, current, 75) == []  # 150 pieces cover 2 x 75
    assert shortfall(cat, current, 76) == [
        Shortfall(designator="U1", id="TU-LN1", needed=152, stock=150, short=2),
        Shortfall(designator="R2", id="TR-10000", needed=152, stock=150, short=2),
    ]


def test_result_shortfall_matches_and_boards_override() -> None:
    spec, current = small_design()
    cat = with_stock(small_catalog(), {"TC-100N": 40})
    result = reoptimise(spec, cat, current, boards=50, samples=SAMPLES)
    assert result.spec.build.boards == 50
    assert result.shortfall == shortfall(cat, current, 50)
    assert [(s.id, s.needed, s.short) for s in result.shortfall] == [("TC-100N", 50, 10)]
    assert all("C1" in c.changed for c in result.candidates)
    result = reoptimise(spec, cat, current, boards=40, samples=SAMPLES)
    assert result.shortfall == [] and result.original.passes


def test_shared_code_short_for_two_positions_changes_one() -> None:
    """Stock for one of the two positions a code fills: changing one of them is enough.

    TR-10000 fills R2 and R3; 15 pieces cover 10 boards for one position, not two. The
    catalog has a second 10 kΩ code, so R3 alone can move to it.
    """
    spec, current = small_design()
    cat = with_stock(small_catalog(), {"TR-10000": 15})
    result = reoptimise(spec, cat, current, samples=SAMPLES, time_limit_s=TIME_LIMIT_S)
    assert result.shortfall == [
        Shortfall(designator="R2", id="TR-10000", needed=20, stock=15, short=5)
    ]
    assert not result.original.passes
    expected = brute_force(spec, cat, current, [])
    assert expected.min_changes == 1
    assert {len(c.changed) for c in result.candidates} == {1}
    assert [ids_of(c.parts) for c in result.candidates] == expected.best


def test_more_rows_when_the_full_model_drops_the_first_ones() -> None:
    """Eight cheap R3 codes sit where the search model is inside the band, the full one not.

    The search model leaves out the integrator's bias current (here 2 µA through R3); at
    the lower band edge that moves the frequency by a few hundred ppm, so the search accepts
    rows the full model rejects. Ranked by cost, those eight come first; the one R3 that
    really works (97.6 kΩ, dearer) ranks ninth. With top = 1 the search takes 7 rows.
    """
    high_bias = dataclasses.replace(opamp("TU-JF2"), id="TU-HB2", bias_a=2e-6, offset_v=5e-3)
    parts = [resistor("TR-R1", 10e3), resistor("TR-R2", 33e3), resistor("TR-R3", 100e3)]
    parts += [resistor(f"TR-E{n}", 100e3, cost=0.001) for n in range(8)]
    parts.append(resistor("TR-976", 97.6e3, cost=0.05))
    cat = catalog_of(parts, [capacitor("TC-C1", 4.7e-9)], [high_bias])
    current = {"U1": "TU-HB2", "R1": "TR-R1", "R2": "TR-R2", "R3": "TR-R3", "C1": "TC-C1"}
    osc = resolve(current, cat).oscillator(rails_from_supply(make_spec(1e3, 5.0).supply))
    # Lower band edge 190 ppm above the full model's frequency for R3 = 100 kΩ.
    target = float(osc.frequency_hz) * math.exp(190e-6) / 0.97
    spec = make_spec(target, float(osc.amplitude_vpp), f_tol=3.0, a_tol=10.0, by="cost", top=1)
    expected = brute_force(spec, cat, current, ["TR-R3"])
    assert expected.min_changes == 1 and expected.best[0][3] == "TR-976"
    result = reoptimise(spec, cat, current, without=["TR-R3"], samples=SAMPLES)
    assert [ids_of(c.parts) for c in result.candidates] == expected.best


# --------------------------------------------------------------------------------------------
# CLI


def design_file(tmp_path: Path, current: dict[str, str], name: str = "board.toml") -> Path:
    """A DESIGN file: the demo spec text plus a [parts] table."""
    parts = "\n".join(f'{k} = "{v}"' for k, v in current.items())
    spec_text = DEMO_SPEC.read_text(encoding="utf-8").replace("top = 10", "top = 2")
    text = "[spec]\n" + "\n".join(
        f"[spec.{line[1:]}" if line.startswith("[") else line for line in spec_text.splitlines()
    )
    path = tmp_path / name
    path.write_text(f"{text}\n\n[parts]\n{parts}\n", encoding="utf-8")
    return path


def test_cli_prints_the_changes(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    current = demo_design()
    path = design_file(tmp_path, current)
    code = main(
        ["reoptimise", str(path), "--catalog", str(DEMO_CATALOG), "--without", current["R3"]]
    )
    out = capsys.readouterr().out
    assert code == 0
    assert "needs changes" in out and f"{current['R3']} is marked unavailable" in out
    assert f"R3: {current['R3']} -> " in out
    assert "1 change(s)" in out


def test_cli_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    current = demo_design()
    path = design_file(tmp_path, current)
    argv = ["reoptimise", str(path), "--catalog", str(DEMO_CATALOG), "--json"]
    code = main([*argv, "--without", current["C1"], "--boards", "20", "--top", "2"])
    data = json.loads(capsys.readouterr().out)
    assert code == 0
    assert {"original", "candidates", "infeasible", "shortfall"} <= set(data)
    assert data["original"]["parts"] == current and data["original"]["passes"] is False
    assert data["spec"]["build"]["boards"] == 20
    assert data["infeasible"] is None and data["shortfall"] == []
    assert 1 <= len(data["candidates"]) <= 2
    for c in data["candidates"]:
        assert "C1" in c["changed"]
        assert {ch["designator"] for ch in c["changes"]} == set(c["changed"])
        for ch in c["changes"]:
            assert set(ch) == {"designator", "from_id", "to_id", "why"}
            assert ch["from_id"] == current[ch["designator"]]
            assert ch["to_id"] == c["parts"][ch["designator"]]["id"] != ch["from_id"]
            assert ch["why"]


def test_cli_json_reports_shortfall(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    current = demo_design()
    path = design_file(tmp_path, current)
    u1 = demo_catalog().get(current["U1"])
    boards = u1.stock + 1  # U1 alone runs short (a dual: one package a board)
    code = main(
        ["reoptimise", str(path), "--catalog", str(DEMO_CATALOG), "--json", "--boards", str(boards)]
    )
    data = json.loads(capsys.readouterr().out)
    assert code == (0 if data["candidates"] else 3)  # 3: no design, the JSON still written
    expected = shortfall(demo_catalog(), current, boards)
    assert data["shortfall"] == [s.model_dump() for s in expected]
    assert current["U1"] in [s["id"] for s in data["shortfall"]]
    if data["candidates"]:
        assert all("U1" in c["changed"] for c in data["candidates"])
    else:
        assert data["infeasible"]["reasons"]


@pytest.mark.parametrize(
    ("extra", "needle"),
    [
        (["--without", "TX-NOPE"], "without"),
        (["--boards", "0"], "boards"),
        (["--top", "many"], "--top"),
    ],
)
def test_cli_bad_input_exits_2_with_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], extra: list[str], needle: str
) -> None:
    path = design_file(tmp_path, demo_design())
    code = main(["reoptimise", str(path), "--catalog", str(DEMO_CATALOG), *extra])
    err = capsys.readouterr().err
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and needle in err


def test_cli_bad_design_file_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    current = dict(demo_design())
    del current["R2"]
    path = design_file(tmp_path, current)
    code = main(["reoptimise", str(path), "--catalog", str(DEMO_CATALOG)])
    err = capsys.readouterr().err
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and "parts.R2" in err
    code = main(["reoptimise", str(tmp_path / "absent.toml"), "--catalog", str(DEMO_CATALOG)])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1 and "absent.toml" in err
