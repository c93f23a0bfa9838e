"""The zener-clamped loop's search form (``circuits.clamped_schmitt.searchform``).

On a small catalog of demo parts (plus invented test parts for the exclusions), every row
(stage x R1 x R2 x R3 x C1) is checked against the topology's own model at the board the form
builds for it: predictions, levels, stock, cost and lines, exclusions and the board round
trip. The reference named beside each check is the topology's own board path
(``CLAMPED_SCHMITT.board_point`` and ``predict``, ``circuits.board.Design``'s counting rule):
the same model reached two ways, held to 1e-12 (common practice for one formula evaluated
twice).
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections import Counter
from collections.abc import Mapping
from typing import Any

import numpy as np
import pytest

from tristock.circuits.board import Board, Design, board_from, resolve
from tristock.circuits.clamped_schmitt import CLAMPED_SCHMITT, SEARCH_FORM
from tristock.circuits.clamped_schmitt.clamplevels import ClampStage
from tristock.circuits.clamped_schmitt.physics import Clamp
from tristock.circuits.clamped_schmitt.searchform import (
    ClampedSchmittForm,
)
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.searchform import F64, I64, StageOption
from tristock.examples import demo_catalog_dir
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, Part, Resistor

DEMO = load_catalog(demo_catalog_dir())
RESISTORS = ("R1F-200R", "R1F-2K00", "R1F-10K0", "R1F-22K1", "R1F-100K")
CAPACITORS = ("CPPG-4N70", "CPPG-10N0")
OPAMPS = ("GA-JF2", "GA-RO2", "GA-HS1", "GA-LP2B")  # HS1: ±12 V over its rating; LP2B: no stock
#: A zener rated 0.1 mW (invented test part): R5 = 200 Ω overloads it even at the heaviest load.
HOT = Diode("TZ-Z2V4-HOT", "zener", 2.4, 5e-3, 5.0, -1.8, 85.0, 0.72, 1e-4, 0.05, 1000)
ZENERS = ("GD-Z5V1-02", "GD-Z2V4-05", "GD-Z3V0-02", "GD-Z10V0-02", "GD-SW1")  # Z3V0-02: no stock


def small_catalog() -> Catalog:
    diodes = (*(DEMO.get(i) for i in ZENERS), HOT)
    return Catalog(
        DEMO.path,
        tuple(DEMO.get(i) for i in RESISTORS),  # type: ignore[misc]
        tuple(DEMO.get(i) for i in CAPACITORS),  # type: ignore[misc]
        tuple(DEMO.get(i) for i in OPAMPS),  # type: ignore[misc]
        diodes=diodes,  # type: ignore[arg-type]
    )


def spec_at(v: float = 12.0) -> Spec:
    return parse_spec(
        {
            "supply": {"positive_v": v, "negative_v": -v, "tolerance_pct": 5.0},
            "frequency": {"target_hz": 1000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 5.0},
            "build": {"boards": 10},
            "limits": {"resistance_min_ohm": 100.0},
        }
    )


FORM = SEARCH_FORM


def board_of(stage: StageOption, parts: Mapping[str, Part]) -> Any:
    """The board of a row: the stage's parts and the row's (``circuits.board.board_from``)."""
    return board_from(CLAMPED_SCHMITT, {**stage.parts, **parts})


CATALOG = small_catalog()
SPEC = spec_at()


def value(part: Part) -> float:
    """A resistor's or capacitor's value (Ω, F)."""
    assert isinstance(part, Resistor | Capacitor)
    return part.value


R3_VALUES = np.array(sorted(value(DEMO.get(i)) for i in RESISTORS))
STAGES, EXCLUSIONS = FORM.stage_options(SPEC, CATALOG, R3_VALUES)
NAMES = ("R1", "R2", "R3", "C1")


def rows() -> tuple[I64, dict[str, F64], list[dict[str, Part]]]:
    """Every row of the small catalog: stage index, values by designator, parts."""
    res = [CATALOG.get(i) for i in RESISTORS]
    caps = [CATALOG.get(i) for i in CAPACITORS]
    u, parts = [], []
    for n, r1, r2, r3, c1 in itertools.product(range(len(STAGES)), res, res, res, caps):
        u.append(n)
        parts.append({"R1": r1, "R2": r2, "R3": r3, "C1": c1})
    values = {d: np.array([value(p[d]) for p in parts], dtype=np.float64) for d in NAMES}
    return np.array(u, dtype=np.int64), values, parts


U, VALUES, PARTS = rows()


def board_points(rows: I64, rails: Rails) -> Any:
    """The boards of ``rows`` (indices into ``U``/``PARTS``) as the topology's own point on
    ``rails`` at 25 °C: each from ``board_point``, stacked field by field."""
    points = [
        CLAMPED_SCHMITT.board_point(board_of(STAGES[int(U[q])], PARTS[q]), rails, 25.0)
        for q in rows.tolist()
    ]
    names = [f.name for f in dataclasses.fields(points[0])]
    return type(points[0])(**{n: np.array([getattr(x, n) for x in points]) for n in names})


def board_predictions(rails: Rails, moved: dict[str, Any] | None = None) -> Prediction:
    """The topology's own prediction of every row's board on ``rails`` (``board_points``),
    ``moved`` fields changed as given (a function of the field's values)."""
    point = board_points(np.arange(len(U)), rails)
    changes = {name: change(getattr(point, name)) for name, change in (moved or {}).items()}
    return CLAMPED_SCHMITT.predict(dataclasses.replace(point, **changes), rails.v_ref)


def test_the_form_is_the_topologys() -> None:
    assert isinstance(FORM, ClampedSchmittForm)
    assert FORM.topology is CLAMPED_SCHMITT
    assert len(STAGES) > 4  # several op amps, zeners and R5 values make stages
    assert {s.parts["D1"].id for s in STAGES} >= {"GD-Z5V1-02", "GD-Z2V4-05"}


def test_predict_rows_is_the_topologys_predict_at_the_boards_point() -> None:
    rails = rails_from_supply(SPEC.supply)
    levels = FORM.row_levels(STAGES, U, rails, VALUES)
    row = FORM.predict_rows(STAGES, U, VALUES, levels)
    ref = board_predictions(rails)
    assert row.valid.sum() > len(U) // 5
    for field in ("frequency_hz", "amplitude_vpp", "duty_high"):
        got, want = np.asarray(getattr(row.pred, field)), np.asarray(getattr(ref, field))
        # reference: CLAMPED_SCHMITT.predict at the board's own point (1e-12, common practice)
        np.testing.assert_allclose(got[row.valid], want[row.valid], rtol=1e-12, atol=0)
        assert np.all(np.isnan(got[~row.valid]))
    # invalid rows: Ve reaches a level, the model has no finite prediction there, or the
    # clamp is off its design point (reference: the topology's own check, an error)
    ve = row.ve[~row.valid]
    broken = ~np.isfinite(np.asarray(ref.amplitude_vpp)[~row.valid])
    reached = broken | (levels[0][~row.valid] <= ve) | (levels[1][~row.valid] <= -ve)
    rest = np.flatnonzero(~row.valid)[~reached]
    assert len(rest) > 0
    for q in [*rest[:: max(1, len(rest) // 40)].tolist(), *np.flatnonzero(row.valid)[::20]]:
        board = board_of(STAGES[int(U[q])], PARTS[q])
        codes = {w.code for w in CLAMPED_SCHMITT.check(board, rails) if w.severity == "error"}
        assert ("clamp_design_point" in codes) == (not row.valid[q]), q


@pytest.mark.parametrize(("v_pos", "v_neg"), [(12.6, -11.4), (11.4, -12.6), (12.6, -12.6)])
def test_rows_on_other_rails_and_moved_terms_are_the_model(v_pos: float, v_neg: float) -> None:
    """The worst-case probes' path: levels on other rails, slew and delay scaled, offsets at
    the box's centre; the op amp's output levels are recovered from the clamp levels."""
    rails = Rails(v_pos, v_neg)
    levels = FORM.row_levels(STAGES, U, rails, VALUES)
    row = FORM.predict_rows(
        STAGES, U, VALUES, levels, slew_scale=0.7, delay_scale=1.3, centred_offsets=True
    )
    moved = {
        "slew_rise": lambda x: x * 0.7,
        "slew_fall": lambda x: x * 0.7,
        "delay": lambda x: x * 1.3,
        "vos1": lambda x: x * 0.0,
        "vos2": lambda x: x * 0.0,
    }
    ref = board_predictions(rails, moved)
    for field in ("frequency_hz", "amplitude_vpp", "duty_high"):
        got, want = np.asarray(getattr(row.pred, field)), np.asarray(getattr(ref, field))
        # reference: CLAMPED_SCHMITT.predict at the moved board point (the recovered op-amp
        # level rounds at 1e-15, so 1e-12 relative; common practice)
        np.testing.assert_allclose(got[row.valid], want[row.valid], rtol=1e-12, atol=0)


def level_line(rows: I64, rails: Rails, v: F64, high: bool) -> F64:
    """The model's level along the triangle, S0 + g·v (its magnitude on the low side), from
    ``Clamp.level`` and ``Clamp.slope`` at the boards of ``rows`` on ``rails``."""
    point = board_points(rows, rails)
    vo = point.v_pos - point.swing_pos if high else point.v_neg + point.swing_neg
    net = Clamp.of(point)
    s, i = net.level(vo, 0.0, high)
    line = s + net.slope(i, high) * v
    return np.asarray(line if high else -line)


def test_row_levels_lie_inside_the_loops_and_the_level_bounds_intervals() -> None:
    rails = rails_from_supply(SPEC.supply)
    vh, vl = FORM.row_levels(STAGES, U, rails, VALUES)
    loops = [STAGES[n].loop for n in U.tolist()]
    vh_lo, vh_hi = np.array([x.vh_lo for x in loops]), np.array([x.vh_hi for x in loops])
    vl_lo, vl_hi = np.array([x.vl_lo for x in loops]), np.array([x.vl_hi for x in loops])
    # reference: the intervals' definition (designpoint): the level of every row at the
    # clamp's design point (a valid row) inside
    ok = FORM.predict_rows(STAGES, U, VALUES, (vh, vl)).valid
    assert ok.sum() > 50
    inside = (vh_lo <= vh) & (vh <= vh_hi) & (vl_lo <= vl) & (vl <= vl_hi)
    assert np.all(inside[ok])
    tol = SPEC.supply.tolerance_pct / 100
    for zp, zn in itertools.product((-1, 1), repeat=2):
        moved = Rails(12.0 * (1 + zp * tol), -12.0 * (1 + zn * tol))
        lo_h, hi_h, lo_l, hi_l = FORM.level_bounds(STAGES, U, moved)
        h, low = FORM.row_levels(STAGES, U, moved, VALUES)
        assert np.all((lo_h <= h) & (h <= hi_h) & (lo_l <= low) & (low <= hi_l))


def test_the_levels_along_every_cycle_that_can_meet_the_band_lie_inside_the_intervals() -> None:
    """The bounds take the intervals as the levels the model uses anywhere on the cycle: at
    the thresholds and the turns, not only with the triangle at the reference."""
    rails = rails_from_supply(SPEC.supply)
    levels = FORM.row_levels(STAGES, U, rails, VALUES)
    row = FORM.predict_rows(STAGES, U, VALUES, levels)
    a_max = SPEC.triangle.amplitude_vpp * (1 + SPEC.triangle.tolerance_pct / 100)
    keep = np.flatnonzero(row.valid & (np.asarray(row.pred.amplitude_vpp) <= a_max))
    assert len(keep) > 50
    peaks = [np.asarray(x)[keep] for x in (row.pred.peak_low_v, row.pred.peak_high_v)]
    loops = [STAGES[n].loop for n in U[keep].tolist()]
    for high, lo_f, hi_f in ((True, "vh_lo", "vh_hi"), (False, "vl_lo", "vl_hi")):
        lo = np.array([getattr(x, lo_f) for x in loops])
        hi = np.array([getattr(x, hi_f) for x in loops])
        for v in peaks:
            line = level_line(keep, rails, v, high)
            # reference: the model's own level line S0 + g·v (physics.Clamp) at the peaks
            assert np.all((lo <= line) & (line <= hi))


def test_stock_cost_and_lines_are_the_boards() -> None:
    for stage, parts in itertools.islice(zip(itertools.cycle(STAGES), PARTS[::7]), 200):
        board = board_of(stage, parts)
        uses = board.uses()
        own = Counter({p.id: 0 for p in parts.values()})
        own.update(p.id for p in parts.values())
        needs = Counter({p.id: n for p, n in stage.stock_needs})
        # reference: circuits.board.Design's counting (U1's packages, a piece per designator)
        assert uses == needs + own
        assert math.isclose(
            board.cost_per_board, stage.cost_per_board + sum(p.unit_cost for p in parts.values())
        )
        assert len(uses) == stage.lines + len({p.id for p in parts.values()} - set(needs))
        assert set(board.parts()) == set(CLAMPED_SCHMITT.designators)


@pytest.mark.parametrize("u1", ["GA-JF2", "GA-RRC1"])
def test_the_boards_counting_is_designs(u1: str) -> None:
    """``Board`` counts like ``Design`` (a single-channel U1 twice, R1 = R2 one line)."""
    ids = {"U1": u1, "R1": "R1F-10K0", "R2": "R1F-10K0", "R3": "R1F-22K1", "C1": "CPPG-4N70"}
    design: Design = resolve(ids, DEMO)
    board = Board(OPAMP_SCHMITT, tuple(design.parts().items()))
    # reference: circuits.board.Design.uses / cost_per_board / bom_lines
    assert board.uses() == design.uses()
    assert math.isclose(board.cost_per_board, design.cost_per_board)
    assert board.bom_lines == design.bom_lines


def test_exclusions_name_their_reason() -> None:
    found = {(e.designator, e.part_id): e.reason for e in EXCLUSIONS}
    # reference: the limits as the form's docstring states them (common practice)
    assert "outside its rating" in found["U1", "GA-HS1"]
    assert "stock 0" in found["U1", "GA-LP2B"]
    assert found["D1", "GD-Z3V0-02"] == "stock 0 < 20 needed (D1 and D2)"
    r5 = [e.reason for e in EXCLUSIONS if e.designator == "R5"]
    assert any("TZ-Z2V4-HOT" in r and "200 Ω" in r and "exceeds its 0.0001 W" in r for r in r5)
    assert any("200 Ω" in r and "output current into R5 exceeds" in r for r in r5)
    assert any("100 kΩ" in r and "does not clamp" in r for r in r5)
    assert all(e.reason for e in EXCLUSIONS)
    assert "GD-SW1" not in {s.parts["D1"].id for s in STAGES}  # a signal diode is no zener
    low = FORM.stage_options(spec_at(6.0), CATALOG, R3_VALUES)[1]
    why = {(e.designator, e.part_id): e.reason for e in low}
    # reference: 10 V + forward drop is beyond ±6 V less GA-JF2's 1.5 V headroom
    assert "cannot break down" in why["D1", "GD-Z10V0-02"]


def test_a_stage_kept_meets_each_limit_at_some_load() -> None:
    """No stage is kept that the limits rule out, and every stage option's own numbers are
    coherent (stock for every board, a positive Ve margin)."""
    for stage in STAGES:
        assert isinstance(stage, ClampStage)
        assert stage.parts["D1"] == stage.parts["D2"]
        assert all(p.stock >= n * SPEC.build.boards for p, n in stage.stock_needs)
        assert float(stage.loop.vh_hi) > float(stage.loop.ve_hi)
        assert float(stage.loop.vl_hi) > -float(stage.loop.ve_lo)
        assert float(stage.loop.vh_lo) - float(stage.loop.ve_hi) >= 0.0
        assert float(stage.loop.vl_lo) + float(stage.loop.ve_lo) >= 0.0


def same_stage(a: StageOption, b: StageOption) -> bool:
    return (
        {d: p.id for d, p in a.parts.items()} == {d: p.id for d, p in b.parts.items()}
        and [(p.id, n) for p, n in a.stock_needs] == [(p.id, n) for p, n in b.stock_needs]
        and math.isclose(a.cost_per_board, b.cost_per_board)
        and a.lines == b.lines
    )


def test_board_stage_round_trips_a_rows_board() -> None:
    rails = rails_from_supply(SPEC.supply)
    for q in range(0, len(U), 97):
        stage = STAGES[int(U[q])]
        board = board_of(stage, PARTS[q])
        back = FORM.board_stage(board, SPEC)
        assert isinstance(back, ClampStage) and back.index == 0
        # reference: the stage the board was built from (the same parts and counts)
        assert same_stage(back, stage)
        values = {d: VALUES[d][q : q + 1] for d in NAMES}
        one = np.zeros(1, dtype=np.int64)
        levels = FORM.row_levels([back], one, rails, values)
        assert float(back.loop.vh_lo) <= levels[0][0] <= float(back.loop.vh_hi)
        assert float(back.loop.vl_lo) <= levels[1][0] <= float(back.loop.vl_hi)
        r3 = value(PARTS[q]["R3"])
        ve = back.model.offset_v + back.model.bias_a * r3
        assert float(back.loop.ve_lo) == ve == float(back.loop.ve_hi)
        again = FORM.predict_rows([back], one, values, levels)
        first = FORM.predict_rows(STAGES, U[q : q + 1], values, levels)
        # reference: the row's prediction through its original stage
        assert again.valid[0] == first.valid[0]
        if first.valid[0]:
            f_again, f_first = (np.asarray(x.pred.frequency_hz) for x in (again, first))
            assert float(f_again[0]) == float(f_first[0])


def test_board_stage_says_why_an_op_amp_cannot_swing_on_the_rails() -> None:
    stage = STAGES[0]
    board = board_of(stage, PARTS[0])
    single = parse_spec(
        {
            "supply": {"positive_v": 2.0, "negative_v": 0.0},
            "frequency": {"target_hz": 1000.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 0.5, "tolerance_pct": 5.0},
        }
    )
    # reference: GA-JF2's 1.5 V headroom each side leaves no swing on a 2 V supply
    assert "cannot swing" in str(FORM.board_stage(board, single))
