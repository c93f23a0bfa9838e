"""The search model (tristock.search.model, search.rows): rows are the full circuit model.

Outside references, named beside each check:
- the full closed-form model ``physics.predict`` (itself checked against ngspice and
  an event simulation in test_circuit.py), run here on the same part values with the
  op amp as catalogued;
- the textbook result for the ideal op amp, f = R2/(4·R1·R3·C1) and a triangle of
  2·V·R1/R2 peak to peak for a square of ±V (Sedra & Smith, *Microelectronic Circuits*,
  bistable multivibrator with integrator; from memory);
- for unequal square levels, the integrator's constant slope V/(R3·C1) over the threshold
  span k·(VH + VL), which gives T = k·R3·C1·(VH + VL)·(1/VH + 1/VL) (derived here, common
  practice);
- distinct-stock-code counts from ``tristock.circuits.board.Design`` (a plain Counter of ids).
"""

from __future__ import annotations

import dataclasses
import math
import re
from functools import cache
from pathlib import Path

import numpy as np
import pytest
from numpy.typing import NDArray

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.designs import design
from tristock.search import model as search_model
from tristock.search.cpsat import cpsat_top
from tristock.search.enumeration import enumerate_top
from tristock.search.model import (
    BALANCED_WEIGHTS,
    COST_RESOLUTION,
    SCORE_RESOLUTION,
    SearchModel,
    build_model,
)
from tristock.search.rows import Rows, evaluate
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Resistor

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "catalogs" / "demo"
I64 = np.int64


@cache
def demo() -> Catalog:
    return load_catalog(DEMO)


def demo_opamp_ids() -> list[str]:
    return [o.id for o in demo().opamps]


def supply_for(part: OpAmp) -> dict[str, float]:
    """Rails inside the part's rated span: 5 V single supply, ±5 V or ±12 V."""
    if part.supply_max_v <= 5.5:
        return {"positive_v": 5.0, "negative_v": 0.0}
    if part.supply_max_v <= 12:
        return {"positive_v": 5.0, "negative_v": -5.0}
    return {"positive_v": 12.0, "negative_v": -12.0}


def spec_of(data: dict[str, object]) -> Spec:
    return parse_spec(data)


def with_parts(
    catalog: Catalog,
    *,
    resistors: tuple[Resistor, ...] | None = None,
    capacitors: tuple[Capacitor, ...] | None = None,
    opamps: tuple[OpAmp, ...] | None = None,
) -> Catalog:
    return Catalog(
        catalog.path,
        catalog.resistors if resistors is None else resistors,
        catalog.capacitors if capacitors is None else capacitors,
        catalog.opamps if opamps is None else opamps,
    )


def random_rows(model: SearchModel, n: int, seed: int) -> Rows:
    """``n`` random combinations through ``evaluate``; only those meeting the spec come back."""
    rng = np.random.default_rng(seed)
    nr, nc, nu = len(model.resistors), len(model.capacitors), len(model.opamps)
    return evaluate(
        model,
        rng.integers(0, nu, n),
        rng.integers(0, nr, n),
        rng.integers(0, nr, n),
        rng.integers(0, nr, n),
        rng.integers(0, nc, n),
    )


def values(model: SearchModel, rows: Rows) -> tuple[NDArray[np.float64], ...]:
    """(R1, R2, R3, C1) in ohm and farad for every row."""
    res, cap = model.resistors.parts, model.capacitors.parts
    return (
        np.array([res[i].value for i in rows.i1]),
        np.array([res[i].value for i in rows.i2]),
        np.array([res[i].value for i in rows.i3]),
        np.array([cap[j].value for j in rows.j]),
    )


def ideal_opamp(
    op_id: str = "TU-IDEAL",
    *,
    swing_pos: float = 0.0,
    swing_neg: float = 0.0,
    channels: int = 2,
    stock: int = 10_000,
) -> OpAmp:
    """An ideal op amp: no delay, infinite slew rate and GBW, no offset or bias."""
    return OpAmp(
        id=op_id,
        channels=channels,
        supply_min_v=0.0,
        supply_max_v=100.0,
        swing_pos_v=swing_pos,
        swing_neg_v=swing_neg,
        slew_v_per_us=math.inf,
        gbw_hz=math.inf,
        delay_s=0.0,
        offset_v=0.0,
        bias_a=0.0,
        output_a=1.0,
        unit_cost=0.5,
        stock=stock,
    )


def resistor(rid: str, ohm: float, *, stock: int = 10_000, cost: float = 0.004) -> Resistor:
    return Resistor(rid, ohm, 1.0, 100.0, "E24", 0.1, "0603", cost, stock)


def capacitor(cid: str, farad: float, *, stock: int = 10_000, cost: float = 0.05) -> Capacitor:
    return Capacitor(cid, farad, "C0G", 5.0, 0.0, None, 50.0, "0603", cost, stock)


# --------------------------------------------------------------------------------------------
# Search model against the full model, demo op amps


def _one_opamp_model(op_id: str) -> tuple[SearchModel, OpAmp, Spec]:
    part = dataclasses.replace(next(o for o in demo().opamps if o.id == op_id), stock=10**6)
    sup = supply_for(part)
    span = sup["positive_v"] - sup["negative_v"]
    spec = spec_of(
        {
            "supply": sup,
            "frequency": {"target_hz": 300.0, "tolerance_pct": 5.0},
            "triangle": {"amplitude_vpp": 0.4 * span, "tolerance_pct": 10.0},
            "limits": {"max_timing_share": 0.4},
        }
    )
    model = build_model(spec, with_parts(demo(), opamps=(part,)))
    assert [o.part.id for o in model.opamps] == [op_id], model.exclusions
    return model, part, spec


def _full(
    model: SearchModel, part: OpAmp, spec: Spec, rows: Rows
) -> tuple[NDArray[np.float64], ...]:
    """ln(f/f_target) and ln(A/A_target) from ``predict``, the op amp as catalogued."""
    m = OpAmpModel.from_part(part)
    vh, vl = square_levels(rails_from_supply(spec.supply), m)
    r1, r2, r3, c1 = values(model, rows)
    p = predict(
        r1,
        r2,
        r3,
        c1,
        vh,
        vl,
        slew_rise=m.slew_rise_v_per_s,
        slew_fall=m.slew_fall_v_per_s,
        delay=m.delay_s,
        gbw=m.gbw_hz,
        vos1=m.offset_v,
        ib1=m.bias_a,
        vos2=m.comparator_offset_v,
        ib2=m.comparator_bias_a,
        integrator_gbw=m.gbw_hz,
    )
    f = np.asarray(p.frequency_hz)
    a = np.asarray(p.amplitude_vpp)
    return np.log(f / spec.frequency.target_hz), np.log(a / spec.triangle.amplitude_vpp)


@pytest.mark.parametrize("op_id", demo_opamp_ids())
def test_rows_are_the_full_model(op_id: str) -> None:
    """Every accepted row's e_f and e_a are ``predict``'s own, to rounding: the search scores
    and accepts with the full model, not a linearised one."""
    model, part, spec = _one_opamp_model(op_id)
    batches = [random_rows(model, 100_000, seed=7)]
    while sum(map(len, batches)) < 30 and len(batches) < 8:  # slow parts accept ~1 in 5,000
        batches.append(random_rows(model, 100_000, seed=7 + len(batches)))
    rows = Rows.concat(batches)
    assert len(rows) >= 30
    ef_full, ea_full = _full(model, part, spec, rows)
    np.testing.assert_allclose(rows.e_f, ef_full, rtol=0, atol=1e-13)
    np.testing.assert_allclose(rows.e_a, ea_full, rtol=0, atol=1e-13)
    assert np.all(rows.share <= spec.limits.max_timing_share)


@pytest.mark.parametrize("op_id", demo_opamp_ids())
def test_constants_reproduce_the_target_exactly(op_id: str) -> None:
    """At P = X and k = k_target the full model gives the target frequency and amplitude,
    however P is split between R3 and C1 and k between R1 and R2 (ρ and β depend on P and k
    only)."""
    model, part, spec = _one_opamp_model(op_id)
    o = model.opamps[0].target
    assert o is not None
    m = OpAmpModel.from_part(part)
    kt = math.exp(o.ln_k_target)
    for r2, r3 in ((100e3, 10e3), (33e3, 470e3)):
        p = predict(
            kt * r2,
            r2,
            r3,
            o.x / (kt * r3),
            model.opamps[0].vh,
            model.opamps[0].vl,
            slew_rise=m.slew_rise_v_per_s,
            slew_fall=m.slew_fall_v_per_s,
            delay=m.delay_s,
            gbw=m.gbw_hz,
            integrator_gbw=m.gbw_hz,
        )
        assert float(p.frequency_hz) == pytest.approx(spec.frequency.target_hz, rel=1e-9)
        assert float(p.amplitude_vpp) == pytest.approx(spec.triangle.amplitude_vpp, rel=1e-9)


# --------------------------------------------------------------------------------------------
# Ideal op amp: the textbook forms, exactly


def _e24_catalog(op: OpAmp) -> Catalog:
    from tristock.stock import eseries

    res = tuple(resistor(f"TR-{n:03d}", v) for n, v in enumerate(eseries.values("E24", 1e3, 1e6)))
    caps = tuple(
        capacitor(f"TC-{n:03d}", v) for n, v in enumerate(eseries.values("E12", 1e-9, 1e-6))
    )
    return Catalog(Path("<memory>"), res, caps, (op,))


def test_ideal_symmetric_frequency_is_the_textbook_formula() -> None:
    """f = R2/(4·R1·R3·C1), triangle 2·V·R1/R2 Vpp for a ±V square (Sedra & Smith, from
    memory). With no delay the model's log form is exact, so agreement is to rounding."""
    spec = spec_of(
        {
            "supply": {"positive_v": 10.0, "negative_v": -10.0},
            "frequency": {"target_hz": 2000.0, "tolerance_pct": 50.0},
            "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 50.0},
        }
    )
    model = build_model(spec, _e24_catalog(ideal_opamp()))
    rows = random_rows(model, 120_000, seed=3)
    assert len(rows) > 200
    r1, r2, r3, c1 = values(model, rows)
    textbook_f = r2 / (4 * r1 * r3 * c1)
    textbook_a = 2 * 10.0 * r1 / r2
    np.testing.assert_allclose(rows.e_f, np.log(textbook_f / 2000.0), rtol=0, atol=1e-12)
    np.testing.assert_allclose(rows.e_a, np.log(textbook_a / 6.0), rtol=0, atol=1e-12)


def test_ideal_unequal_levels_follow_the_slope_argument() -> None:
    """Single 10 V supply, headroom 1.0 V high and 0.2 V low: VH = 4.0 V, VL = 4.8 V from the
    mid-rail reference. T = k·R3·C1·(VH + VL)·(1/VH + 1/VL) and A = k·(VH + VL) (slope
    argument, common practice)."""
    spec = spec_of(
        {
            "supply": {"positive_v": 10.0, "negative_v": 0.0},
            "frequency": {"target_hz": 500.0, "tolerance_pct": 50.0},
            "triangle": {"amplitude_vpp": 3.0, "tolerance_pct": 50.0},
        }
    )
    model = build_model(spec, _e24_catalog(ideal_opamp(swing_pos=1.0, swing_neg=0.2)))
    assert (model.opamps[0].vh, model.opamps[0].vl) == pytest.approx((4.0, 4.8))
    rows = random_rows(model, 120_000, seed=4)
    assert len(rows) > 200
    r1, r2, r3, c1 = values(model, rows)
    k = r1 / r2
    period = k * r3 * c1 * (4.0 + 4.8) * (1 / 4.0 + 1 / 4.8)
    np.testing.assert_allclose(rows.e_f, np.log(1 / period / 500.0), rtol=0, atol=1e-12)
    np.testing.assert_allclose(rows.e_a, np.log(k * 8.8 / 3.0), rtol=0, atol=1e-12)


# --------------------------------------------------------------------------------------------
# Score quantisation


def test_resolution_is_documented_and_reported() -> None:
    """The module docstring states the resolution (1e-6 of a score unit, 1 ppm of frequency)
    and every design result carries it."""
    doc = search_model.__doc__ or ""
    stated = re.search(r"SCORE_RESOLUTION``\s*=\s*([0-9.eE+-]+)", doc)
    assert stated is not None and float(stated.group(1)) == SCORE_RESOLUTION
    assert "1 ppm" in doc
    spec = spec_of(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0},
            "frequency": {"target_hz": 1000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 5.0},
            "ranking": {"top": 1},
        }
    )
    result = design(spec, demo(), samples=200)
    assert result.search.score_resolution == SCORE_RESOLUTION


def _mode_model(mode: str) -> tuple[SearchModel, Rows]:
    spec = spec_of(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0},
            "frequency": {"target_hz": 1000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 5.0},
            "environment": {"temp_min_c": -20.0, "temp_max_c": 70.0},
            "ranking": {"by": mode},
        }
    )
    model = build_model(spec, demo())
    rows = enumerate_top(model, 400, 30.0).rows
    assert len(rows) == 400
    return model, rows


def test_frequency_error_score_counts_whole_ppm() -> None:
    """frequency_error mode: primary = round(|ln f/f_target| / 1 ppm), nothing else."""
    _, rows = _mode_model("frequency_error")
    np.testing.assert_array_equal(rows.primary, np.rint(np.abs(rows.e_f) / 1e-6))
    # the tie-breaker is the cost per board in steps of COST_RESOLUTION
    np.testing.assert_array_equal(rows.secondary, np.rint(rows.cost / COST_RESOLUTION))


def test_balanced_score_is_the_weighted_sum_to_half_a_step_per_term() -> None:
    """balanced mode: primary·resolution equals the unquantised weighted sum (weights as
    documented in BALANCED_WEIGHTS, computed here from the part records) to within half a
    step for each of the 7 separately rounded terms."""
    model, rows = _mode_model("balanced")
    w = BALANCED_WEIGHTS
    res, cap = model.resistors.parts, model.capacitors.parts
    band_f, band_a = model.band_f[1], model.band_a[1]
    scale = model.cost_scale
    total = w["frequency_error"] * np.abs(rows.e_f) / band_f
    total = total + w["amplitude_error"] * np.abs(rows.e_a) / band_a
    for n in range(len(rows)):
        u = model.opamps[rows.u[n]]
        passives = [res[rows.i1[n]], res[rows.i2[n]], res[rows.i3[n]], cap[rows.j[n]]]
        tol = [p.tolerance_pct / 100 for p in passives]
        c1 = passives[3]
        assert isinstance(c1, Capacitor)
        if c1.is_class_ii:
            tol[3] += (c1.temp_band_pct or 0.0) / 100
        lines = len({p.id for p in passives}) + 1
        total[n] += (
            sum(w["tolerance_spread"] * t / band_f for t in tol)
            + sum(w["cost"] * p.unit_cost / scale for p in passives)
            + w["cost"] * u.part.cost_per_board / scale
            + w["sensitivity"] * rows.share[n]
            + w["bom_lines"] * lines
        )
    assert np.all(np.abs(rows.primary * SCORE_RESOLUTION - total) <= 4.0 * SCORE_RESOLUTION)
    assert np.ptp(rows.primary) > 1000  # the check spans many distinct scores


def test_cost_score_is_cost_in_steps() -> None:
    _, rows = _mode_model("cost")
    assert np.all(np.abs(rows.primary * COST_RESOLUTION - rows.cost) <= 2.5 * COST_RESOLUTION)


def test_yield_mode_searches_in_frequency_error_order() -> None:
    """yield mode: the engines list rows by |e_f| (1 ppm steps) with cost as tie-breaker; the
    Monte Carlo yield then orders them (``search.design``)."""
    _, rows = _mode_model("yield")
    np.testing.assert_array_equal(rows.primary, np.rint(np.abs(rows.e_f) / 1e-6))
    np.testing.assert_array_equal(rows.secondary, np.rint(rows.cost / COST_RESOLUTION))


# --------------------------------------------------------------------------------------------
# Shared stock codes: BOM lines and stock x boards

# Three resistors (two of one value under different stock codes) and one capacitor, with the
# ideal op amp on ±10 V. The loop needs k = R1/R2 < 1 (the thresholds ±10·k V must lie inside
# the integrator's swing), so R1 is a 10 kΩ and R2 the 22 kΩ; R3 may be any of the three:
# f = R2/(4·R1·R3·C1) is 1000 or 2200 Hz around 1500 Hz, A = 20·10/22 = 9.09 Vpp. The six
# buildable combinations include R3 sharing R1's stock code and R3 sharing R2's.
SHARED_IDS = ("TR-A10K", "TR-B10K", "TR-C22K")


def shared_catalog(*, stock_a: int = 10_000, op: OpAmp | None = None) -> Catalog:
    res = (
        resistor("TR-A10K", 10e3, stock=stock_a),
        resistor("TR-B10K", 10e3),
        resistor("TR-C22K", 22e3),
    )
    return Catalog(Path("<memory>"), res, (capacitor("TC-25N", 25e-9),), (op or ideal_opamp(),))


def shared_spec(boards: int = 1, by: str = "balanced") -> Spec:
    return spec_of(
        {
            "supply": {"positive_v": 10.0, "negative_v": -10.0},
            "frequency": {"target_hz": 1500.0, "tolerance_pct": 50.0},
            "triangle": {"amplitude_vpp": 9.0, "tolerance_pct": 5.0},
            "build": {"boards": boards},
            "ranking": {"by": by, "top": 27},
        }
    )


BUILDABLE = {(r1, "TR-C22K", r3) for r1 in ("TR-A10K", "TR-B10K") for r3 in SHARED_IDS}


def every_combination(model: SearchModel, *, coupled: bool = True) -> Rows:
    n = len(model.resistors)
    grid = np.indices((1, n, n, n, len(model.capacitors))).reshape(5, -1).astype(I64)
    return evaluate(model, *grid, coupled=coupled)


def ids(model: SearchModel, rows: Rows, n: int) -> tuple[str, str, str]:
    res = model.resistors.parts
    return (res[rows.i1[n]].id, res[rows.i2[n]].id, res[rows.i3[n]].id)


def test_only_loops_that_can_turn_are_rows() -> None:
    """k ≥ 1 puts a threshold at or beyond the square level: the triangle cannot reach it
    inside the integrator's swing, so those combinations are not rows (common practice)."""
    model = build_model(shared_spec(), shared_catalog())
    rows = every_combination(model)
    assert {ids(model, rows, n) for n in range(len(rows))} == BUILDABLE


def test_bom_lines_count_distinct_stock_codes() -> None:
    """A stock code in two positions is one BOM line (U1 and C1 are one each)."""
    model = build_model(shared_spec(), shared_catalog())
    rows = every_combination(model)
    by_ids = {ids(model, rows, n): int(rows.lines[n]) for n in range(len(rows))}
    assert by_ids[("TR-A10K", "TR-C22K", "TR-B10K")] == 5
    assert by_ids[("TR-A10K", "TR-C22K", "TR-A10K")] == 4  # R1 = R3
    assert by_ids[("TR-A10K", "TR-C22K", "TR-C22K")] == 4  # R2 = R3
    cat = shared_catalog()
    res = {r.id: r for r in cat.resistors}
    for (a, b, c), lines in by_ids.items():
        d = Design(cat.opamps[0], res[a], res[b], res[c], cat.capacitors[0])
        assert lines == d.bom_lines


def test_balanced_score_credits_each_saved_line() -> None:
    """Same values, same errors: R3 sharing R1's stock code scores one bom_lines weight less
    than R3 from a second code of the same value (tolerance and cost equal)."""
    model = build_model(shared_spec(), shared_catalog())
    rows = every_combination(model)
    score = {ids(model, rows, n): int(rows.primary[n]) for n in range(len(rows))}
    shared = score[("TR-A10K", "TR-C22K", "TR-A10K")]
    separate = score[("TR-A10K", "TR-C22K", "TR-B10K")]
    assert separate - shared == round(BALANCED_WEIGHTS["bom_lines"] / SCORE_RESOLUTION)


@pytest.mark.parametrize(
    ("combo", "uses"),
    [
        (("TR-A10K", "TR-C22K", "TR-A10K"), 2),  # R1 and R3
        (("TR-B10K", "TR-C22K", "TR-C22K"), 1),  # the other code twice, TR-A10K not at all
        (("TR-A10K", "TR-C22K", "TR-B10K"), 1),
    ],
)
def test_stock_covers_boards_times_positions(combo: tuple[str, str, str], uses: int) -> None:
    """A stock code in n positions takes n pieces per board: with 30 on hand it survives
    30 // n boards and no more. Without coupling (left to CP-SAT) it always survives."""
    limit = 30 // uses if "TR-A10K" in combo else 30
    for boards, expected in ((limit, True), (limit + 1, "TR-A10K" not in combo)):
        model = build_model(shared_spec(boards), shared_catalog(stock_a=30))
        got = {ids(model, r, n) for r in [every_combination(model)] for n in range(len(r))}
        assert (combo in got) is expected, (boards, combo)
        if boards <= 30:  # beyond that the code is out of the model altogether
            loose = every_combination(model, coupled=False)
            assert combo in {ids(model, loose, n) for n in range(len(loose))}


@pytest.mark.parametrize("by", ["balanced", "frequency_error", "cost", "yield"])
def test_engines_respect_shared_stock(by: str) -> None:
    """Both engines leave out a code used twice when 2 x boards exceeds its stock, and keep
    it when it fits: 30 pieces of TR-A10K, 15 boards fit two positions, 16 do not."""
    for boards in (15, 16):
        model = build_model(shared_spec(boards, by), shared_catalog(stock_a=30))
        for found in (enumerate_top(model, 27, 30.0), cpsat_top(model, 27, 30.0)):
            assert found.proven_optimal
            combos = [ids(model, found.rows, n) for n in range(len(found.rows))]
            twice = [c for c in combos if c.count("TR-A10K") >= 2]
            assert twice == ([("TR-A10K", "TR-C22K", "TR-A10K")] if boards == 15 else [])
            assert len(combos) == len(every_combination(model))


def test_single_channel_opamp_needs_two_packages_per_board() -> None:
    """U1 from a single-channel part takes two packages a board: 15 in stock cover 7 boards."""
    op = ideal_opamp("TU-SINGLE", channels=1, stock=15)
    assert [o.part.id for o in build_model(shared_spec(7), shared_catalog(op=op)).opamps] == [
        "TU-SINGLE"
    ]
    model = build_model(shared_spec(8), shared_catalog(op=op))
    assert model.opamps == []
    assert any(e.part_id == "TU-SINGLE" and "16" in e.reason for e in model.exclusions)


def test_a_topology_without_a_search_form_is_refused_in_one_line() -> None:
    # every registered circuit has a search form now: a test double of one without
    base = type(TOPOLOGIES["duty_schmitt"])
    no_form = type("NoForm", (base,), {"name": "no_form", "search_form": lambda self: None})
    unsearchable = [no_form()]
    spec = spec_of(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0},
            "frequency": {"target_hz": 1000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 4.0, "tolerance_pct": 5.0},
        }
    )
    for topology in unsearchable:
        with pytest.raises(ValueError, match=rf"^topology: {topology.name} has no search form"):
            build_model(spec, demo(), topology)
        with pytest.raises(ValueError) as err:
            build_model(spec, demo(), topology)
        assert "\n" not in str(err.value)
