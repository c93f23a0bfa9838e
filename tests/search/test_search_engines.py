"""The two search engines against plain brute force, and against each other.

Reference: brute force written here -- ``itertools.product`` over every (U1, R1, R2, R3, C1),
each scored and checked by ``model.evaluate`` (the search model's own definition of a row),
sorted by ``rank_key`` (score, tie-breaker, stock codes), the first ``top`` kept. Both
engines claim to be exact within that model, so the lists of stock codes and the integer
scores must be identical, not merely close.
"""

from __future__ import annotations

import dataclasses
import itertools
from functools import cache
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tristock.circuits.opamp_schmitt.physics import predict
from tristock.search.cpsat import cpsat_top
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.model import SECONDARY_SPAN, SearchModel, build_model
from tristock.search.rows import Rows, evaluate, rank_key
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Resistor

REPO = Path(__file__).resolve().parents[2]
MODES = ("balanced", "frequency_error", "cost", "yield")
ENGINE_LIMIT_S = 60.0  # generous: the answers must be proven, never cut short

Key = tuple[str, str, str, str, str]


def keys(model: SearchModel, rows: Rows) -> list[Key]:
    """Stock codes (U1, R1, R2, R3, C1) of every row, in order."""
    out = []
    for n in range(len(rows)):
        k = rank_key(model, rows, n)
        out.append((k[2], k[3], k[4], k[5], k[6]))
    return out


def scores(rows: Rows) -> list[tuple[int, int]]:
    return [(int(p), int(s)) for p, s in zip(rows.primary, rows.secondary, strict=True)]


def brute_force(model: SearchModel, top: int) -> Rows:
    """Every combination through ``evaluate``, sorted by ``rank_key``, the first ``top``."""
    combos = np.array(
        list(
            itertools.product(
                range(len(model.opamps)),
                range(len(model.resistors)),
                range(len(model.resistors)),
                range(len(model.resistors)),
                range(len(model.capacitors)),
            )
        ),
        dtype=np.int64,
    ).reshape(-1, 5)
    rows = evaluate(model, *combos.T)
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    return rows.take(np.array(order, dtype=np.int64))


def brute_force_chunked(model: SearchModel, top: int, chunk: int = 400_000) -> Rows:
    """The same for catalogs too big for one array: keep, per chunk, the rows whose packed
    score can still be among the best ``top``, then sort those by ``rank_key``."""
    shape = (
        len(model.opamps),
        len(model.resistors),
        len(model.resistors),
        len(model.resistors),
        len(model.capacitors),
    )
    total = int(np.prod(shape))
    kept: list[Rows] = []
    for start in range(0, total, chunk):
        flat = np.arange(start, min(start + chunk, total), dtype=np.int64)
        rows = evaluate(model, *np.unravel_index(flat, shape))
        kept.append(rows)
        merged = Rows.concat(kept)
        if len(merged) > top:
            packed = merged.primary * SECONDARY_SPAN + merged.secondary
            kth = np.partition(packed, top - 1)[top - 1]
            merged = merged.take(packed <= kth)
        kept = [merged]
    rows = kept[0]
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    return rows.take(np.array(order, dtype=np.int64))


def assert_same(model: SearchModel, expected: Rows, *found: EngineResult) -> None:
    for result in found:
        assert result.proven_optimal
        assert keys(model, result.rows) == keys(model, expected)
        assert scores(result.rows) == scores(expected)


# --------------------------------------------------------------------------------------------
# Random small catalogs and specs

COSTS = st.integers(1, 400).map(lambda n: n / 1000)  # catalog prices, 0.001 steps
#: Pieces on hand: often plenty, sometimes fewer than 1..50 boards (or twice that) need.
#: Plenty comes first, so the simplest example hypothesis tries is a well-stocked one.
STOCK = st.sampled_from([5000, 1000, 1000, 100, 60, 30, 10, 0])


@st.composite
def resistors(draw: st.DrawFn) -> tuple[Resistor, ...]:
    series = draw(st.sampled_from(["E12", "E24", "E96"]))  # E12 first: dense ratios
    pool = eseries.values(series, 1e3, 1e5)
    n = draw(st.sampled_from([12, 10, 8, 6, 4]))  # larger first: more rows than top
    # distinct values, then sometimes one value again under a second stock code (exact ties)
    picks = draw(st.lists(st.integers(0, len(pool) - 1), min_size=n, max_size=n, unique=True))
    if draw(st.booleans()):
        picks[-1] = picks[0]
    out = []
    for i, pick in enumerate(picks):
        grade = draw(st.sampled_from([(0.1, 25.0), (1.0, 100.0), (5.0, 200.0)]))
        out.append(
            Resistor(
                id=f"TR-{i:02d}",
                value_ohm=pool[pick],
                tolerance_pct=grade[0],
                tempco_ppm=grade[1],
                series=series,
                power_w=0.1,
                package="0603",
                unit_cost=draw(COSTS),
                stock=draw(STOCK),
            )
        )
    return tuple(out)


@st.composite
def capacitors(draw: st.DrawFn) -> tuple[Capacitor, ...]:
    pool = eseries.values("E12", 1e-9, 1e-7)
    n = draw(st.sampled_from([6, 4, 3, 2]))
    picks = draw(st.lists(st.integers(0, len(pool) - 1), min_size=n, max_size=n, unique=True))
    out = []
    for i, pick in enumerate(picks):
        kind = draw(
            st.sampled_from(
                [
                    ("C0G", 5.0, 0.0, None),
                    ("PP", 2.0, -200.0, None),
                    ("PET", 5.0, 400.0, None),
                    ("X7R", 10.0, None, 15.0),
                ]
            )
        )
        out.append(
            Capacitor(
                id=f"TC-{i:02d}",
                value_f=pool[pick],
                dielectric=kind[0],
                tolerance_pct=kind[1],
                tempco_ppm=kind[2],
                temp_band_pct=kind[3],
                voltage_v=draw(st.sampled_from([16.0, 50.0, 100.0])),
                package="0805",
                unit_cost=draw(COSTS),
                stock=draw(STOCK),
            )
        )
    return tuple(out)


# (supply_min, supply_max, swing+, swing-, slew V/µs, gbw Hz, delay s, offset V, bias A):
# invented but typical of JFET, bipolar and rail-to-rail-output CMOS parts.
OPAMP_CLASSES = [
    (7.0, 36.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11),
    (3.0, 32.0, 1.5, 1.0, 0.3, 7e5, 8e-6, 2e-3, 4.5e-8),
    (4.5, 36.0, 0.1, 0.1, 5.0, 1e7, 0.8e-6, 5e-4, 1e-11),
]


@st.composite
def opamps(draw: st.DrawFn) -> tuple[OpAmp, ...]:
    n = draw(st.sampled_from([3, 2, 1]))
    out = []
    for i in range(n):
        lo, hi, sp, sn, slew, gbw, delay, vos, ib = draw(st.sampled_from(OPAMP_CLASSES))
        scale = draw(st.sampled_from([0.5, 1.0, 2.0]))
        out.append(
            OpAmp(
                id=f"TU-{i}",
                channels=draw(st.sampled_from([2, 1])),
                supply_min_v=lo,
                supply_max_v=hi,
                swing_pos_v=sp,
                swing_neg_v=sn,
                slew_v_per_us=slew * scale,
                gbw_hz=gbw,
                delay_s=delay / scale,
                offset_v=vos,
                bias_a=ib,
                output_a=0.02,
                unit_cost=draw(st.integers(100, 2000).map(lambda c: c / 1000)),
                stock=draw(STOCK),
            )
        )
    return tuple(out)


@st.composite
def cases(draw: st.DrawFn) -> tuple[Catalog, Spec]:
    """A random catalog and a spec aimed near one of its combinations, so that some
    combinations meet it (and, with tight bands and stock, often none do)."""
    res, caps, ops = draw(resistors()), draw(capacitors()), draw(opamps())
    rail = draw(st.sampled_from([9.0, 12.0, 15.0]))
    # R1 < R2 with room below the k < 0.95 limit (any pair when the values allow none)
    pairs = [
        (a, b) for a in range(len(res)) for b in range(len(res))
        if res[a].value_ohm < 0.9 * res[b].value_ohm
    ] or [(0, 1)]  # fmt: skip
    i1, i2 = draw(st.sampled_from(pairs))
    k = res[i1].value_ohm / res[i2].value_ohm
    timing = [
        (a, b) for a in range(len(res)) for b in range(len(caps))
        if 100 <= 1 / (4 * k * res[a].value_ohm * caps[b].value_f) <= 20e3
    ] or [(0, 0)]  # fmt: skip
    i3, j = draw(st.sampled_from(timing))
    if draw(st.sampled_from([True, True, False])):  # the aimed parts are on the shelf
        res = tuple(
            dataclasses.replace(r, stock=5000) if n in (i1, i2, i3) else r
            for n, r in enumerate(res)
        )
        caps = tuple(
            dataclasses.replace(c, stock=5000, dielectric="C0G", tempco_ppm=0.0,
                                temp_band_pct=None) if n == j else c
            for n, c in enumerate(caps)
        )  # fmt: skip
        ops = (dataclasses.replace(ops[0], stock=5000), *ops[1:])
    catalog = Catalog(Path("<hypothesis>"), res, caps, ops)
    r1, r2 = res[i1].value_ohm, res[i2].value_ohm
    r3 = res[i3].value_ohm
    cap = caps[j].value_f
    # Aim at what the full model predicts for one combination with the first op amp, moved
    # by up to 80 % of each band: that combination meets the bands (stock and limits allowing).
    u = ops[0]
    aim = predict(r1, r2, r3, cap, rail - u.swing_pos_v, rail - u.swing_neg_v,
                  slew_rise=u.slew_v_per_s, slew_fall=u.slew_v_per_s, delay=u.delay_s,
                  gbw=u.gbw_hz, integrator_gbw=u.gbw_hz)  # fmt: skip
    tol_f = draw(st.sampled_from([20.0, 10.0, 5.0, 2.0, 1.0, 0.5]))
    tol_a = draw(st.sampled_from([20.0, 10.0, 5.0, 2.0, 1.0]))
    move = st.floats(-0.8, 0.8)
    target_f = min(max(float(aim.frequency_hz) * (1 + draw(move) * tol_f / 100), 20.0), 50e3)
    amplitude = min(float(aim.amplitude_vpp) * (1 + draw(move) * tol_a / 100), 2 * rail - 0.5)
    aimed_cost = u.cost_per_board + sum(p.unit_cost for p in (res[i1], res[i2], res[i3], caps[j]))
    cap_at = draw(st.sampled_from([None, None, 1.0, 0.9, 1.5]))
    data: dict[str, object] = {
        "supply": {
            "positive_v": rail,
            "negative_v": -rail,
            "tolerance_pct": draw(st.sampled_from([0.0, 2.0, 5.0])),
        },
        "frequency": {"target_hz": target_f, "tolerance_pct": tol_f},
        "triangle": {"amplitude_vpp": amplitude, "tolerance_pct": tol_a},
        "environment": draw(st.sampled_from([{}, {"temp_min_c": -40.0, "temp_max_c": 85.0}])),
        "build": {"boards": draw(st.integers(1, 50))},
        "limits": {
            "guarantee": draw(st.sampled_from(["nominal", "nominal", "worst_case"])),
            # none, or a cap at (or around) the aimed combination's cost per board
            "max_cost": None if cap_at is None else cap_at * aimed_cost,
        },
        "ranking": {
            "by": draw(st.sampled_from(MODES)),
            "top": draw(st.sampled_from([5, 10, 1, 3])),
        },
    }
    return catalog, parse_spec(data)


def test_engines_equal_brute_force_on_random_catalogs() -> None:
    """Brute force == enumerate_top == cpsat_top: same stock codes, same scores, proven.

    30 derandomised hypothesis examples; the generator is only useful if a fair share of
    them has answers, which is counted and checked at the end.
    """
    answered: list[bool] = []

    @settings(
        max_examples=30,
        deadline=None,
        derandomize=True,
        database=None,
        suppress_health_check=[HealthCheck.too_slow],
    )
    @given(cases())
    def check(case: tuple[Catalog, Spec]) -> None:
        catalog, spec = case
        model = build_model(spec, catalog)
        top = spec.ranking.top
        expected = brute_force(model, top)
        assert_same(
            model,
            expected,
            enumerate_top(model, top, ENGINE_LIMIT_S),
            cpsat_top(model, top, ENGINE_LIMIT_S),
        )
        answered.append(len(expected) > 0)

    check()
    assert sum(answered) >= len(answered) // 4, answered


# --------------------------------------------------------------------------------------------
# Fixed cases on the demo stock room


@cache
def demo() -> Catalog:
    return load_catalog(REPO / "catalogs" / "demo")


def demo_spec(by: str, **extra: object) -> Spec:
    data: dict[str, object] = {
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
        "frequency": {"target_hz": 2000.0, "tolerance_pct": 1.0},
        "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 5.0},
        "environment": {"temp_min_c": 0.0, "temp_max_c": 60.0},
        "ranking": {"by": by, "top": 10},
    }
    data.update(extra)
    return parse_spec(data)


@pytest.mark.parametrize("by", MODES)
def test_engines_agree_on_the_demo_catalog(by: str) -> None:
    """Full demo catalog (about 4e10 combinations): identical top-10 from both, both proven."""
    model = build_model(demo_spec(by), demo())
    e = enumerate_top(model, 10, ENGINE_LIMIT_S)
    c = cpsat_top(model, 10, ENGINE_LIMIT_S)
    assert e.proven_optimal and c.proven_optimal
    assert len(e.rows) == 10
    assert keys(model, e.rows) == keys(model, c.rows)
    assert scores(e.rows) == scores(c.rows)


@pytest.mark.parametrize(
    "extra",
    [
        {"limits": {"max_cost": 0.3}},
        {"build": {"boards": 400}},
        {
            "limits": {"guarantee": "worst_case"},
            "frequency": {"target_hz": 2e3, "tolerance_pct": 10.0},
            "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 10.0},
        },
    ],
    ids=["max_cost", "boards", "worst_case"],
)
def test_engines_agree_on_the_demo_catalog_with_limits(extra: dict[str, object]) -> None:
    """A low cost cap, a build that stock binds, a worst-case guarantee: still identical."""
    model = build_model(demo_spec("balanced", **extra), demo())
    e = enumerate_top(model, 10, ENGINE_LIMIT_S)
    c = cpsat_top(model, 10, ENGINE_LIMIT_S)
    assert e.proven_optimal and c.proven_optimal
    assert len(e.rows) == 10
    assert keys(model, e.rows) == keys(model, c.rows)
    assert scores(e.rows) == scores(c.rows)


@cache
def cut_down_demo() -> Catalog:
    """About 34 resistors (every 11th in 1 kΩ..1 MΩ), 15 capacitors (every 8th usable one)
    and 3 op amps from the demo catalog: about a million combinations."""
    cat = demo()
    res = tuple(r for r in cat.resistors if 1e3 <= r.value_ohm <= 1e6 and r.stock > 0)[::11]
    caps = tuple(c for c in cat.capacitors if c.dielectric != "X7R" and c.stock > 0)[::8]
    ops = tuple(o for o in cat.opamps if o.id in {"GA-JF2", "GA-GP2", "GA-LP2"})
    return Catalog(cat.path, res, caps, ops)


@pytest.mark.parametrize("by", ["balanced", "cost"])  # every mode: test_search_exact.py
def test_engines_equal_brute_force_on_a_cut_down_demo_catalog(by: str) -> None:
    spec = demo_spec(by, frequency={"target_hz": 2000.0, "tolerance_pct": 5.0})
    model = build_model(spec, cut_down_demo())
    assert len(model.opamps) == 3 and len(model.resistors) >= 32
    expected = brute_force_chunked(model, 10)
    assert len(expected) == 10
    assert_same(
        model,
        expected,
        enumerate_top(model, 10, ENGINE_LIMIT_S),
        cpsat_top(model, 10, ENGINE_LIMIT_S),
    )


def shared_codes_catalog() -> Catalog:
    """Two stock codes of 10 kΩ, one of 12 kΩ and one of 15 kΩ, equal grade and price: the
    balanced score separates combinations of equal values only by BOM lines (a code used
    twice is one line), then by stock codes."""
    res = tuple(
        Resistor(rid, ohm, 1.0, 100.0, "E24", 0.1, "0603", 0.004, 10_000)
        for rid, ohm in (("TR-A10K", 10e3), ("TR-B10K", 10e3), ("TR-C12K", 12e3), ("TR-D15K", 15e3))
    )
    cap = Capacitor("TC-22N", 22e-9, "C0G", 5.0, 0.0, None, 50.0, "0603", 0.05, 10_000)
    op = OpAmp("TU-JF", 2, 7.0, 36.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.25, 10_000)
    return Catalog(Path("<memory>"), res, (cap,), (op,))


@pytest.mark.parametrize("top", [1, 3, 7, 64])
@pytest.mark.parametrize("boards", [1, 5000, 6000])
def test_engines_credit_shared_codes_like_brute_force(top: int, boards: int) -> None:
    """±12 V, 1.2 kHz ±20 %, 15.5 Vpp ±20 %: k = 2/3, 0.8 and 5/6 qualify. 10000 pieces
    cover a code in two positions for 5000 boards, not 6000 (then the 10 kΩ pair must split
    across both codes)."""
    spec = parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0},
            "frequency": {"target_hz": 1200.0, "tolerance_pct": 20.0},
            "triangle": {"amplitude_vpp": 15.5, "tolerance_pct": 20.0},
            "build": {"boards": boards},
            "ranking": {"by": "balanced", "top": top},
        }
    )
    model = build_model(spec, shared_codes_catalog())
    expected = brute_force(model, top)
    assert len(expected) == min(top, len(brute_force(model, 64))) > 0
    assert_same(
        model, expected, enumerate_top(model, top, ENGINE_LIMIT_S), cpsat_top(model, top, 60.0)
    )
    if boards <= 5000:  # the best row reuses a code (one BOM line fewer)
        best_codes = keys(model, expected)[0]
        assert len(set(best_codes[1:4])) < 3
