"""Distinct designs: the variant rule, and the distinct top k against brute force.

The rule is written out again here from the issue's words (not from ``designs.variants``):
two boards are variants when R1/R2 is the same ratio (cross-multiplied) with the same
tolerances and tempcos, U1 has the same electrical parameters (every op-amp column but id,
channels, cost, stock), and every other part has the same value, tolerance, tempco (and
dielectric). The expected distinct top k is the brute force's full ranked list (every
accepted design, ``search.test_search_exact.reference``, ``trim_reference.reference`` and
``tuned_reference.reference``, all over the full model) cut into classes by that rule: the
first member of each of the first k classes, with the members ranked above the k-th
class's first member as variants
(all members when fewer than k classes exist).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from trim_reference import OPAMPS, small_spec
from trim_reference import reference as trim_reference
from tuned_reference import reference as tuned_reference

from search.test_search_exact import SAMPLES, reference
from tristock.circuits.board import Design, resolve
from tristock.designs import design
from tristock.designs.variants import variant_key
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor

SKIP = {"id", "channels", "unit_cost", "stock", "delay_to_mid_s"}


def _same_part(a: Part, b: Part) -> bool:
    if isinstance(a, OpAmp) and isinstance(b, OpAmp):
        fa, fb = dataclasses.asdict(a), dataclasses.asdict(b)
        return all(fa[k] == fb[k] for k in fa if k not in SKIP)
    if type(a) is not type(b):
        return False
    if not math.isclose(a.value, b.value, rel_tol=1e-9):  # type: ignore[union-attr]
        return False
    same = a.tolerance_pct == b.tolerance_pct and a.tempco_ppm == b.tempco_ppm  # type: ignore[union-attr]
    if isinstance(a, Capacitor) and isinstance(b, Capacitor):
        same &= a.dielectric == b.dielectric and a.temp_band_pct == b.temp_band_pct
    return same


def same_class(a: Design, b: Design) -> bool:
    """The issue's rule, independently of ``variant_key``."""
    cross = a.r1.value_ohm * b.r2.value_ohm, b.r1.value_ohm * a.r2.value_ohm
    if not math.isclose(*cross, rel_tol=1e-9):
        return False
    for r in ("r1", "r2"):
        ra, rb = getattr(a, r), getattr(b, r)
        if (ra.tolerance_pct, ra.tempco_ppm) != (rb.tolerance_pct, rb.tempco_ppm):
            return False
    pa, pb = a.parts(), b.parts()
    if pa.keys() != pb.keys():
        return False
    return all(_same_part(pa[k], pb[k]) for k in pa if k not in ("R1", "R2"))


def expected_distinct(
    ranked: list[tuple[str, ...]], names: tuple[str, ...], catalog: Catalog, top: int
) -> list[tuple[tuple[str, ...], list[tuple[tuple[str, ...], int]]]]:
    """(best member, [(variant, rank among all), ...]) of the first ``top`` classes."""
    boards = [resolve(dict(zip(names, ids, strict=True)), catalog) for ids in ranked]
    heads: list[int] = []
    members: dict[int, list[int]] = {}
    for n, b in enumerate(boards):
        home = next((h for h in heads if same_class(boards[h], b)), None)
        if home is None:
            heads.append(n)
            members[n] = []
        else:
            members[home].append(n)
    heads = heads[:top]
    if not heads:
        return []
    cut = heads[-1] if len(heads) == top else len(boards)
    return [(ranked[h], [(ranked[m], m + 1) for m in members[h] if m < cut]) for h in heads]


def got_distinct(
    result_candidates: list[object], names: tuple[str, ...]
) -> list[tuple[tuple[str, ...], list[tuple[tuple[str, ...], int]]]]:
    out = []
    for c in result_candidates:
        ids = tuple(c.parts[d].id for d in names)  # type: ignore[attr-defined]
        vs = [(tuple(v.parts[d] for d in names), v.rank_all) for v in c.variants]  # type: ignore[attr-defined]
        out.append((ids, vs))
    return out


# --------------------------------------------------------------------------------------------
# The rule


def _r(pid: str, v: float, tol: float = 1.0, tc: float = 100.0) -> Resistor:
    return Resistor(pid, v, tol, tc, "E24", 0.25, "0603", 0.01, 1000)


C = Capacitor("TC-1", 2.2e-9, "C0G", 2.0, 0.0, None, 50.0, "0805", 0.05, 1000)
U2 = OpAmp("TU-2", 2, 4.0, 36.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.24, 1000)


def test_scaled_threshold_pair_another_package_and_another_code_are_one_design() -> None:
    base = Design(U2, _r("A", 10.5e3), _r("B", 38.3e3), _r("C", 105e3), C)
    quad = dataclasses.replace(U2, id="TU-4", channels=4, unit_cost=0.3, stock=5)
    scaled = Design(quad, _r("A2", 1.05e3), _r("B2", 3.83e3), _r("C2", 105e3), C)
    by_three = Design(U2, _r("A3", 31.5e3), _r("B3", 114.9e3), _r("C", 105e3), C)
    other_cap = dataclasses.replace(C, id="TC-9", voltage_v=100.0, package="1206")
    assert variant_key(base) == variant_key(scaled) == variant_key(by_three)
    assert variant_key(base) == variant_key(dataclasses.replace(base, c1=other_cap))


@pytest.mark.parametrize(
    "change",
    [
        {"r2": _r("B", 38.4e3)},  # another ratio (by 0.26 %)
        {"r1": _r("A", 10.5e3, tol=0.1)},  # another tolerance
        {"r3": _r("C", 105e3, tc=25.0)},  # another tempco
        {"c1": dataclasses.replace(C, dielectric="PP")},
        {"u1": dataclasses.replace(U2, slew_v_per_us=12.0)},  # another op amp
    ],
)
def test_another_value_tolerance_tempco_or_op_amp_is_another_design(
    change: dict[str, Part],
) -> None:
    base = Design(U2, _r("A", 10.5e3), _r("B", 38.3e3), _r("C", 105e3), C)
    assert variant_key(base) != variant_key(dataclasses.replace(base, **change))  # type: ignore[arg-type]


# --------------------------------------------------------------------------------------------
# Fixed designs against brute force

NAMES = ("U1", "R1", "R2", "R3", "C1")


@st.composite
def variant_catalogs(draw: st.DrawFn) -> Catalog:
    """E12 values over two decades, some drawn again ten times larger or under a second code,
    op amps of which some share every electrical parameter (a dual and a single)."""
    pool = eseries.values("E12", 1e3, 1e4)  # IEC 60063
    picks = draw(st.lists(st.sampled_from(pool), min_size=5, max_size=7, unique=True))
    res: list[Resistor] = []
    for n, v in enumerate(sorted(picks)):
        tol = draw(st.sampled_from([1.0, 1.0, 0.1]))
        res.append(_r(f"TR-{n}", v, tol))
        if draw(st.booleans()):
            res.append(_r(f"TS-{n}", 10 * v, tol))  # the ×10 variant
        if draw(st.booleans()):
            res.append(dataclasses.replace(res[-1], id=f"TD-{n}", unit_cost=0.02))
    cvals = draw(st.lists(st.sampled_from(eseries.values("E6", 1e-9, 47e-9)), min_size=2,
                          max_size=3, unique=True))  # fmt: skip
    caps = [Capacitor(f"TC-{n}", v, "C0G", 2.0, 0.0, None, 50.0, "0805", 0.05, 10**4)
            for n, v in enumerate(sorted(cvals))]  # fmt: skip
    if draw(st.booleans()):
        caps.append(dataclasses.replace(caps[0], id="TC-X", unit_cost=0.04, voltage_v=100.0))
    slow = OpAmp("TU-S", 2, 4.0, 36.0, 1.5, 1.5, 1.0, 1e6, 1e-6, 2e-3, 5e-8, 0.02, 0.3, 10**4)
    ops = [U2, dataclasses.replace(U2, id="TU-1", channels=1, unit_cost=0.1)]
    if draw(st.booleans()):
        ops.append(slow)
    return Catalog(Path("<memory>"), tuple(res), tuple(caps), tuple(ops))


def _buildable_target(catalog: Catalog, draw: st.DrawFn) -> tuple[float, float]:
    """A frequency and amplitude one combination of the catalog reaches (ideal formula,
    A = (VH + VL)·R1/R2 with VH = VL = 10.5 V, f = R2/(4·R1·R3·C1); the spec's bands are
    wide enough that several designs meet it)."""
    r1 = draw(st.sampled_from(catalog.resistors))
    r2 = draw(st.sampled_from([r for r in catalog.resistors if r.value_ohm > 2 * r1.value_ohm]
                              or list(catalog.resistors)))  # fmt: skip
    r3 = draw(st.sampled_from(catalog.resistors))
    c1 = draw(st.sampled_from(catalog.capacitors))
    k = r1.value_ohm / r2.value_ohm
    return 1 / (4 * k * r3.value_ohm * c1.value_f), min(21.0 * k, 18.0)


@pytest.mark.parametrize("by", ["frequency_error", "balanced", "cost", "yield"])
@settings(
    max_examples=8,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
@given(data=st.data())
def test_distinct_top_k_is_the_brute_force_top_k_over_classes(by: str, data: st.DataObject) -> None:
    catalog = data.draw(variant_catalogs())
    f, a = _buildable_target(catalog, data.draw)
    spec = parse_spec(spec_data(f, a, 10.0, 10.0, "nominal", by, 0.4))
    spec = _with_top(spec, data.draw(st.integers(1, 4)))
    every = reference(_with_top(spec, 10**6), catalog)  # every accepted design, ranked
    expected = expected_distinct(every, NAMES, catalog, spec.ranking.top)
    for engine in ("enumerate", "cpsat"):
        result = design(
            spec, catalog, engine=engine, time_limit_s=60.0, samples=SAMPLES, distinct=True
        )
        assert result.search.proven_optimal and result.search.distinct
        assert got_distinct(result.candidates, NAMES) == expected, engine


def spec_data(
    f: float, a: float, tf: float, ta: float, g: str, by: str, share: float
) -> dict[str, object]:
    """The random tests' spec (as in ``search.test_search_exact``): ±12 V ±2 %, 15..45 °C."""
    return {
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
        "frequency": {"target_hz": f, "tolerance_pct": tf},
        "triangle": {"amplitude_vpp": min(a, 20.0), "tolerance_pct": ta},
        "environment": {"temp_min_c": 15.0, "temp_max_c": 45.0},
        "build": {"boards": 20},
        "limits": {"guarantee": g, "max_timing_share": share, "min_yield": 0.6},
        "ranking": {"by": by, "top": 6},
    }


def _with_top(spec: Spec, top: int) -> Spec:
    return spec.model_copy(update={"ranking": spec.ranking.model_copy(update={"top": top})})


def test_a_catalog_of_variants_only_gives_one_design_with_every_variant() -> None:
    """One ratio (10 k/27 k), three scales, two op-amp packages: 6 boards, 1 design."""
    res = [_r("A1", 10e3), _r("B1", 27e3), _r("A2", 1e3), _r("B2", 2.7e3), _r("A3", 100e3),
           _r("B3", 270e3), _r("R3", 47e3)]  # fmt: skip
    single = dataclasses.replace(U2, id="TU-1", channels=1, unit_cost=0.1)
    catalog = Catalog(Path("<memory>"), tuple(res), (C,), (U2, single))
    k = 10 / 27
    spec = parse_spec(spec_data(1 / (4 * k * 47e3 * 2.2e-9), 21 * k, 10.0, 10.0, "nominal",
                                 "frequency_error", 0.4))  # fmt: skip
    spec = _with_top(spec, 3)
    every = reference(_with_top(spec, 10**6), catalog)
    got = design(spec, catalog, time_limit_s=60.0, distinct=True)
    assert len(got.candidates) == 1
    assert [v.rank_all for v in got.candidates[0].variants] == list(range(2, len(every) + 1))
    assert len(every) >= 2


# --------------------------------------------------------------------------------------------
# Trimmed designs against brute force


@pytest.mark.parametrize("top", [1, 2, 3])
def test_distinct_trimmed_top_k_is_the_brute_force_top_k_over_classes(top: int) -> None:
    """The trimmed brute force's ranked list on a catalog with a dual and a single of the
    same electrical parameters and 22 k, 27 k under a second code: 12 accepted boards in 2
    classes, so the distinct top 1, 2 and 3 cut the list at the first, second and no class."""
    values = eseries.values("E12", 2.2e3, 68e3)  # IEC 60063
    res = [_r(f"TR-{v:g}", v) for v in values]
    res += [_r(f"TS-{v:g}", 10 * v) for v in values[:2]]  # 22 k, 27 k under a second code
    caps = tuple(Capacitor(f"TC-{v:g}", v, "C0G", 2.0, 0.0, None, 50.0, "0805", 0.05, 1000)
                 for v in (2.2e-9, 4.7e-9))  # fmt: skip
    pots = (Pot("TV-10k", 10e3, 10.0, 100.0, "trimmer", 0.3, 1000),)
    single = dataclasses.replace(OPAMPS[0], id="TU-J1", channels=1, unit_cost=0.1)
    catalog = Catalog(Path("<memory>"), tuple(res), caps, (OPAMPS[0], single), pots)
    spec = _with_top(small_spec(), top)
    names = ("U1", "R1", "R2", "R3", "C1", "RV1")
    every = trim_reference(spec, catalog, 100)
    expected = expected_distinct(every, names, catalog, top)
    got = design(spec, catalog, time_limit_s=120.0, samples=200, distinct=True)
    assert got.search.proven_optimal
    assert len(every) == 12 and len(expected) == min(top, 2)
    assert got_distinct(got.candidates, names) == expected


# --------------------------------------------------------------------------------------------
# Tuned designs against brute force


def test_distinct_tuned_top_k_is_the_brute_force_top_k_over_classes() -> None:
    """The tuned brute force's ranked list (``tuned_reference``, every accepted design of the
    fewest range count) on the tuned tests' case with answers, with a single-channel op amp
    of the dual's electrical parameters (the same cost per board, so each design's two
    packages rank side by side, the dual first by its stock code) and 10 k/22 k also as
    100 k/220 k."""
    res = tuple(
        Resistor(f"TR-{v:g}", v, 1.0, 100.0, "E12", 0.25, "0603", 0.01, 500)
        for v in (10e3, 22e3, 33e3, 47e3, 100e3, 220e3)
    )
    caps = tuple(
        Capacitor(f"TC-{v:g}", v, "C0G", 5.0, 30.0, None, 50.0, "0603", c, 500)
        for v, c in ((1e-9, 0.02), (2.2e-9, 0.021), (4.7e-9, 0.03), (10e-9, 0.04), (22e-9, 0.05))
    )
    dual = OpAmp("TU-1", 2, 3.0, 40.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.3, 10**4)
    single = dataclasses.replace(dual, id="TU-1S", channels=1, unit_cost=0.15)
    pots = (
        Pot("VP-10K", 10e3, 20.0, 150.0, "panel", 1.5, 1000),
        Pot("VP-50K", 50e3, 20.0, 150.0, "panel", 1.2, 1000),
    )
    catalog = Catalog(Path("<memory>"), res, caps, (dual, single), pots)
    spec = parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 7.0, "tolerance_pct": 15.0},
            "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
            "tuning": {"low_hz": 300.0, "high_hz": 2.5e3, "control": "divider"},
            "ranking": {"top": 3},
        }
    )
    keyed = tuned_reference(_with_top(spec, 10**6), catalog)
    every = [ids for *_, ids in keyed]
    boards = [
        resolve(
            {"U1": i[0], "R1": i[1], "R2": i[2], "R3": i[3], "R4": i[4], "RV1": i[5],
             **{f"C{n + 1}": c for n, c in enumerate(i[6:])}},
            catalog, control="divider",
        )
        for i in every
    ]  # fmt: skip
    heads: list[int] = []
    members: dict[int, list[int]] = {}
    for n, b in enumerate(boards):
        home = next((h for h in heads if same_class(boards[h], b)), None)
        if home is None:
            heads.append(n)
            members[n] = []
        else:
            members[home].append(n)
    top = 3
    heads = heads[:top]
    cut = heads[-1] if len(heads) == top else len(boards)
    expected = [
        ({k: p.id for k, p in boards[h].parts().items()},
         [({k: p.id for k, p in boards[m].parts().items()}, m + 1) for m in members[h] if m < cut])
        for h in heads
    ]  # fmt: skip
    got = design(spec, catalog, time_limit_s=300.0, samples=200, distinct=True)
    assert got.search.proven_optimal
    assert any(vs for _, vs in expected)  # the case has variants
    assert [
        ({k: p.id for k, p in c.parts.items()}, [(v.parts, v.rank_all) for v in c.variants])
        for c in got.candidates
    ] == expected
