"""The comparator-IC loop's search form (``circuits.comparator_schmitt.searchform``) against
the topology's own model, on the demo stock room and on small hand-made catalogs.

References: the topology's own model (``COMPARATOR_SCHMITT.predict`` of a board's point, and
its checks), the search's bounds (``search.bounds``, which the form's ``StageLoop`` feeds),
and common practice for one formula reached by two paths (1e-12 relative).
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections import Counter, defaultdict
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from tristock.circuits.board import board_from
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT
from tristock.circuits.comparator_schmitt.physics import high_level
from tristock.circuits.comparator_schmitt.searchform import ComparatorSchmittForm
from tristock.circuits.comparator_schmitt.spread import EDGE_SPREAD
from tristock.circuits.comparator_schmitt.stagelevels import (
    PULL_UP_LOAD_SHARE,
    fall_delay_exponent,
    probe_error_voltage,
    sources,
)
from tristock.circuits.comparator_schmitt.stages import ComparatorStage
from tristock.circuits.looptiming import loop_timing
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.searchform import StageLoop, StageOption
from tristock.examples import demo_catalog_dir
from tristock.search.bounds import amplitude_bounds, period_bounds
from tristock.search.parts import eligible_capacitors, eligible_resistors
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.comparators import Comparator
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor

REL = 1e-12  # one formula by two paths (common practice)
FORM = ComparatorSchmittForm(COMPARATOR_SCHMITT, open_drain=True)


def board_of(stage: StageOption, parts: Mapping[str, Part]) -> Any:
    """The board of a row: the stage's parts and the row's (``circuits.board.board_from``)."""
    return board_from(COMPARATOR_SCHMITT, {**stage.parts, **parts})


assert isinstance(FORM, ComparatorSchmittForm)


def spec_of(v_pos: float, v_neg: float, f: float, a: float, **limits: object) -> Spec:
    return Spec.model_validate(
        {
            "supply": {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": 5},
            "frequency": {"target_hz": f, "tolerance_pct": 2},
            "triangle": {"amplitude_vpp": a, "tolerance_pct": 5},
            "environment": {"temp_min_c": 0, "temp_max_c": 50},
            "build": {"boards": 10},
            "limits": limits,
        }
    )


SINGLE_5V = spec_of(5, 0, 50e3, 2)
SPLIT_12V = spec_of(12, -12, 1e3, 5)


# ---- a small hand-made stock room (invented codes) --------------------------------------


def resistor(code: str, ohm: float, stock: int = 1000) -> Resistor:
    return Resistor(code, ohm, 1.0, 100.0, "E24", 0.1, "0603", 0.01, stock)


def capacitor(code: str, farad: float) -> Capacitor:
    return Capacitor(code, farad, "C0G", 5.0, 0.0, None, 50.0, "0603", 0.05, 1000)


OPAMP = OpAmp(
    id="TA-D2", channels=2, supply_min_v=2.5, supply_max_v=36.0, swing_pos_v=0.1,
    swing_neg_v=0.1, slew_v_per_us=10.0, gbw_hz=10e6, delay_s=1e-6, offset_v=1e-3,
    bias_a=1e-9, output_a=0.02, unit_cost=0.5, stock=100,
)  # fmt: skip
PUSH_PULL = Comparator(
    id="TC-PP", channels=1, output="push-pull", supply_min_v=2.7, supply_max_v=36.0,
    delay_s=100e-9, rise_s=20e-9, fall_s=20e-9, vol_v=0.2, voh_headroom_v=0.3,
    offset_v=1e-3, bias_a=50e-9, output_a=0.01, input_cm_neg_v=None,
    input_cm_pos_headroom_v=None, unit_cost=0.3, stock=100,
)  # fmt: skip


def small_catalog(*extra_comparators: Comparator, extra_opamps: tuple[OpAmp, ...] = ()) -> Catalog:
    """Three op amps (a dual, a single, one with a huge bias current), push-pull U2s with equal
    and unequal edges, an open-drain U2 with unequal edges and one with equal edges; five
    resistors in the spec's range (220 kΩ: loads light enough for the stiffness rule with a
    4.7 kΩ or 10 kΩ pull-up) and a 100 Ω one (a pull-up that overloads U2), three C0G
    capacitors."""
    opamps = (
        OPAMP,
        dataclasses.replace(
            OPAMP, id="TA-S1", channels=1, swing_pos_v=1.0, swing_neg_v=1.0, gbw_hz=3e6,
            offset_v=-2e-3, bias_a=50e-9, unit_cost=0.2,
        ),
        # a bias current large enough that Ve = Ib·R3 reaches a level with the larger R3
        dataclasses.replace(OPAMP, id="TA-HB", bias_a=40e-6, unit_cost=0.4),
        *extra_opamps,
    )  # fmt: skip
    comparators = (
        PUSH_PULL,
        dataclasses.replace(PUSH_PULL, id="TC-PPA", rise_s=30e-9, fall_s=10e-9, supply_max_v=5.5),
        dataclasses.replace(
            PUSH_PULL, id="TC-OD", output="open-drain", voh_headroom_v=None, delay_s=400e-9,
            rise_s=200e-9, fall_s=60e-9, vol_v=0.25, output_a=6e-3, unit_cost=0.14,
        ),
        dataclasses.replace(
            PUSH_PULL, id="TC-ODE", output="open-drain", voh_headroom_v=None, delay_s=300e-9,
            rise_s=100e-9, fall_s=100e-9, output_a=0.02,
        ),
        *extra_comparators,
    )  # fmt: skip
    values = (
        ("100R", 100.0), ("1K00", 1e3), ("4K70", 4.7e3), ("10K0", 10e3), ("47K0", 47e3),
        ("220K", 220e3),
    )  # fmt: skip
    resistors = tuple(resistor(f"TR-{n}", ohm) for n, ohm in values)
    capacitors = tuple(
        capacitor(f"TK-{n}", c) for n, c in (("1N00", 1e-9), ("4N70", 4.7e-9), ("22N0", 22e-9))
    )
    return Catalog(
        path=Path("hand-made"),
        resistors=resistors,
        capacitors=capacitors,
        opamps=opamps,
        comparators=comparators,
    )


@pytest.fixture(scope="module")
def demo() -> Catalog:
    return load_catalog(demo_catalog_dir())


def options(spec: Spec, catalog: Catalog) -> list[ComparatorStage]:
    res, _ = eligible_resistors(spec, catalog)
    stages, _ = FORM.stage_options(spec, catalog, res.value)
    assert all(isinstance(s, ComparatorStage) for s in stages)
    return [s for s in stages if isinstance(s, ComparatorStage)]


class Rows:
    """Rows (stage index, R1, R2, R3, C1 parts) and their values by designator."""

    def __init__(self, stages: list[ComparatorStage], combos: list[tuple[int, ...]], spec: Spec,
                 catalog: Catalog) -> None:  # fmt: skip
        res, _ = eligible_resistors(spec, catalog)
        caps, _ = eligible_capacitors(spec, catalog, "C1")
        self.stages = stages
        self.u = np.array([c[0] for c in combos], dtype=np.int64)
        picked = [
            (res.parts[i1], res.parts[i2], res.parts[i3], caps.parts[j])
            for _, i1, i2, i3, j in combos
        ]
        self.parts = [dict(zip(("R1", "R2", "R3", "C1"), p, strict=True)) for p in picked]
        self.values = {
            d: np.array([p[d].value for p in self.parts]) for d in ("R1", "R2", "R3", "C1")
        }

    def boards(self) -> Iterator[tuple[int, object]]:
        for n, (u, parts) in enumerate(zip(self.u, self.parts, strict=True)):
            yield n, board_of(self.stages[u], parts)


def every_row(spec: Spec, catalog: Catalog) -> Rows:
    """All stage options x resistor triples x capacitors."""
    stages = options(spec, catalog)
    res, _ = eligible_resistors(spec, catalog)
    caps, _ = eligible_capacitors(spec, catalog, "C1")
    n_r, n_c = range(len(res)), range(len(caps))
    combos = list(itertools.product(range(len(stages)), n_r, n_r, n_r, n_c))
    return Rows(stages, combos, spec, catalog)


def sampled_rows(spec: Spec, catalog: Catalog, n: int, seed: int) -> Rows:
    """``n`` rows drawn uniformly (seeded) from every stage option x triple x capacitor."""
    stages = options(spec, catalog)
    res, _ = eligible_resistors(spec, catalog)
    caps, _ = eligible_capacitors(spec, catalog, "C1")
    rng = np.random.default_rng(seed)
    picks = [rng.integers(0, m, n) for m in (len(stages), len(res), len(res), len(res), len(caps))]
    return Rows(stages, [tuple(int(x) for x in c) for c in zip(*picks, strict=True)], spec, catalog)


def breaks_the_stiffness_rule(board: Any) -> bool:
    """An open-drain board whose R5·(1/R3 + 1/R2) exceeds the rule's ρ (``stagelevels``; the
    topology's check pull_up_load calls it an error)."""
    parts = board.parts()
    if "R5" not in parts:
        return False
    r2, r3, r5 = (parts[d].value_ohm for d in ("R2", "R3", "R5"))
    return bool(r5 * (1.0 / r3 + 1.0 / r2) > PULL_UP_LOAD_SHARE)


def reference(board: object, rails: Rails) -> tuple[float, float, float] | None:
    """The topology's own model of the board at 25 °C on ``rails``: (f, A, duty), or None
    where it does not oscillate, where its triangle leaves U1's output swing (what its
    swing_integrator check calls an error), where it breaks the stiffness rule or where an
    input leaves its common-mode range (the check input_common_mode, an error)."""
    if breaks_the_stiffness_rule(board):
        return None
    point = COMPARATOR_SCHMITT.board_point(board, rails, 25.0)
    try:
        p = COMPARATOR_SCHMITT.predict(point, rails.v_ref)
    except ValueError:
        return None
    u1 = board.parts()["U1"]
    ref = rails.reference_v
    if ref + float(p.peak_high_v) > rails.v_pos - u1.swing_pos_v:
        return None
    if ref + float(p.peak_low_v) < rails.v_neg + u1.swing_neg_v:
        return None
    if common_mode_error(board, rails):
        return None
    return float(p.frequency_hz), float(p.amplitude_vpp), float(p.duty_high)


def common_mode_error(board: object, rails: Rails) -> bool:
    """The topology's own check calls an input's common-mode range an error."""
    return any(
        w.code == "input_common_mode" and w.severity == "error"
        for w in COMPARATOR_SCHMITT.check(board, rails)
    )


FIGURES = ("frequency_hz", "amplitude_vpp", "duty_high")


def predicted(rows: Rows, rails: Rails) -> object:
    levels = FORM.row_levels(rows.stages, rows.u, rails, rows.values)
    return FORM.predict_rows(rows.stages, rows.u, rows.values, levels)


def assert_rows_match(rows: Rows, rails: Rails) -> Counter[str]:
    """Every row's figures are the reference's; the count of valid rows, of rows that do not
    oscillate and of rows whose triangle leaves U1's swing."""
    row = predicted(rows, rails)
    seen: Counter[str] = Counter()
    for n, board in rows.boards():
        want = reference(board, rails)
        seen[kind_of(board, rails) if want is None else "valid"] += 1
        got = tuple(float(np.asarray(getattr(row.pred, f))[n]) for f in FIGURES)
        assert bool(row.valid[n]) == (want is not None), (n, want, got)
        if want is None:
            assert all(math.isnan(x) for x in got)
            continue
        for w, g in zip(want, got, strict=True):
            assert g == pytest.approx(w, rel=REL)
    return seen


def kind_of(board: object, rails: Rails) -> str:
    """Why the reference has no figures: no oscillation, the triangle clips in U1 (then
    the topology's own check says so: swing_integrator, an error), or an input leaves its
    common-mode range (input_common_mode, an error)."""
    point = COMPARATOR_SCHMITT.board_point(board, rails, 25.0)
    try:
        COMPARATOR_SCHMITT.predict(point, rails.v_ref)
    except ValueError:
        return "latches"
    if breaks_the_stiffness_rule(board):
        codes = {(w.code, w.severity) for w in COMPARATOR_SCHMITT.check(board, rails)}
        assert ("pull_up_load", "error") in codes
        return "stiffness"
    codes = {(w.code, w.severity) for w in COMPARATOR_SCHMITT.check(board, rails)}
    if ("swing_integrator", "error") in codes:
        return "clips"
    assert ("input_common_mode", "error") in codes
    return "common_mode"


# ---- (1) every row is the topology's own model ------------------------------------------


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_every_row_of_a_small_catalog_is_the_topology_model(spec: Spec) -> None:
    rows = every_row(spec, small_catalog())
    kinds = {(s.comparator.output, s.comparator.rise_s == s.comparator.fall_s) for s in rows.stages}
    assert ("open-drain", False) in kinds and ("push-pull", True) in kinds
    seen = assert_rows_match(rows, rails_from_supply(spec.supply))
    assert min(seen["valid"], seen["latches"], seen["clips"]) > 0  # every kind of row is met


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_demo_rows_are_the_topology_model(spec: Spec, demo: Catalog) -> None:
    rows = sampled_rows(spec, demo, 3000, seed=13)
    assert assert_rows_match(rows, rails_from_supply(spec.supply))["valid"] > 100


@pytest.mark.parametrize("z", [-1.0, 1.0])
def test_a_probe_is_a_point_of_the_topology_spread_box(z: float) -> None:
    # the worst-case probes scale the op amp's slew by 1 + SLEW_SPREAD·z and its delay by
    # 1 - DELAY_SPREAD·z (search.guarantee): the form moves U2's edges and delay to the ends
    # of the topology's own spread box (U2.edges, U2.delay) with the offsets at its centre,
    # and predicts that point as the topology does
    spec = SINGLE_5V
    rails = rails_from_supply(spec.supply)
    rows = sampled_rows(spec, small_catalog(), 600, seed=8)
    slew, delay = 1 + SLEW_SPREAD * z, 1 - DELAY_SPREAD * z
    vh, vl = FORM.row_levels(rows.stages, rows.u, rails, rows.values)
    row = FORM.predict_rows(
        rows.stages, rows.u, rows.values, (vh, vl), slew_scale=slew, delay_scale=delay,
        centred_offsets=True,
    )  # fmt: skip
    checked = 0
    for n, board in rows.boards():
        box = {v.name: v for v in COMPARATOR_SCHMITT.spread(board, spec).variables}
        edges = {(m.field, m.law, m.amount) for m in box["U2.edges"].moves}
        assert edges == {("rise", "scale", EDGE_SPREAD), ("fall", "scale", EDGE_SPREAD)}
        assert {(m.field, m.amount) for m in box["U2.delay"].moves} == {("delay", DELAY_SPREAD)}
        point = COMPARATOR_SCHMITT.board_point(board, rails, 25.0)
        moved = dataclasses.replace(
            point, rise=point.rise * (1 - EDGE_SPREAD * z), fall=point.fall * (1 - EDGE_SPREAD * z),
            delay=point.delay * delay, vos1=0.0, vos2=0.0,
        )  # fmt: skip
        try:
            want = COMPARATOR_SCHMITT.predict(moved, rails.v_ref)
        except ValueError:
            assert not row.valid[n]
            continue
        if row.valid[n]:
            checked += 1
            for f in FIGURES:
                got = float(np.asarray(getattr(row.pred, f))[n])
                assert got == pytest.approx(float(getattr(want, f)), rel=REL)
    assert checked > 50


def test_push_pull_loop_is_the_model_itself() -> None:
    # The bounds' loop_timing with the stage's StageLoop at a push-pull row's own span and
    # drives (equal edges) gives the topology's own period and amplitude.
    spec = SINGLE_5V
    rows = every_row(spec, small_catalog())
    rails = rails_from_supply(spec.supply)
    row = predicted(rows, rails)
    pick = [
        n for n in range(len(rows.u))
        if row.valid[n] and rows.stages[rows.u[n]].comparator.id == "TC-PP"
    ]  # fmt: skip
    assert len(pick) > 100
    u = rows.u[pick]
    loop = stage_table(rows.stages).take(u)
    r1, r2, r3, c1 = (rows.values[d][pick] for d in ("R1", "R2", "R3", "C1"))
    vh, vl = FORM.row_levels(rows.stages, u, rails, {d: x[pick] for d, x in rows.values.items()})
    ve = np.asarray(row.ve)[pick]
    t = loop_timing(
        r1 / r2, r3 * c1, vh + vl, vh - ve, vl + ve, slew_rise=loop.slew_rise,
        slew_fall=loop.slew_fall, delay=loop.delay, gbw=loop.gbw,
        integrator_gbw=loop.integrator_gbw,
    )  # fmt: skip
    amplitude = (r1 / r2) * (vh + vl) + t.overshoot_v
    pred = row.pred
    np.testing.assert_allclose(t.period_s, np.asarray(pred.period_s)[pick], rtol=REL)
    np.testing.assert_allclose(amplitude, np.asarray(pred.amplitude_vpp)[pick], rtol=REL)


def stage_table(stages: list[ComparatorStage]) -> StageLoop:
    return StageLoop(*(np.array([getattr(s.loop, f) for s in stages]) for f in StageLoop._fields))


# ---- (2) levels inside the stage's intervals, here and on other rails -------------------


def rail_corners(spec: Spec) -> list[Rails]:
    """The nominal rails and each rail at ±tolerance (a single supply's 0 V rail stays)."""
    tol = spec.supply.tolerance_pct / 100
    s = spec.supply
    ref = s.reference_v if s.negative_v == 0 else None
    return [
        Rails(s.positive_v * (1 + zp * tol), s.negative_v * (1 + zn * tol), ref)
        for zp in (-1, 0, 1)
        for zn in (-1, 0, 1)
    ]


def high_at(rows: Rows, row: object, rails: Rails, where: str, centred: bool) -> np.ndarray:
    """The model's high level (``physics.high_level``: vs0 + γ·vt) with the triangle at the
    bottom threshold (what sets the thresholds' distance) or at its top peak; U1's offset at
    0 V (``centred``) or as catalogued."""
    cols = [(s.pull_up_ohm, s.opamp.offset_v, sources(s.comparator, rails)[0]) for s in rows.stages]
    r5, vos1, hs = (np.array([c[i] for c in cols])[rows.u] for i in range(3))
    vos1 = vos1 * (not centred)
    vs0, gamma = high_level(rows.values["R1"], rows.values["R2"], rows.values["R3"], hs, r5, vos1)
    pred = row.pred
    vt = np.asarray(pred.threshold_low_v if where == "bottom" else pred.peak_high_v)
    return np.asarray(vs0 + gamma * vt)


def meets_rule(rows: Rows, values: Mapping[str, np.ndarray] | None = None) -> np.ndarray:
    """Rows that meet the stiffness rule (push-pull rows always): the rows the intervals are
    claimed for (``stagelevels``)."""
    v = rows.values if values is None else values
    r5 = np.array([s.pull_up_ohm for s in rows.stages])[rows.u]
    return np.asarray(r5 * (1.0 / v["R3"] + 1.0 / v["R2"]) <= PULL_UP_LOAD_SHARE)


def assert_levels_inside(
    vh: np.ndarray, vl: np.ndarray, bounds: tuple[np.ndarray, ...], stalled: np.ndarray,
    rule: np.ndarray | None = None,
) -> None:  # fmt: skip
    """VL inside its interval, VH below vh_hi, the span VH + VL above the span's low end, and
    VH above vh_lo where the stage is not stalled (``stagelevels``: a stalled stage's vh_lo
    sits just above Ve_hi and its VL interval carries the span's low end), on the rows that
    meet the stiffness rule (``rule``; default all)."""
    if rule is not None:
        vh, vl, stalled = vh[rule], vl[rule], stalled[rule]
        bounds = tuple(np.broadcast_to(b, rule.shape)[rule] for b in bounds)
    lo_h, hi_h, lo_l, hi_l = bounds
    assert np.all((lo_l <= vl) & (vl <= hi_l) & (vh <= hi_h))
    assert np.all(vh + vl >= (lo_h + lo_l) * (1 - REL))
    assert np.all(lo_h[~stalled] <= vh[~stalled])


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_row_levels_lie_inside_the_stage_intervals(spec: Spec) -> None:
    rows = every_row(spec, small_catalog())
    stages, u = rows.stages, rows.u
    nominal = rails_from_supply(spec.supply)
    loop = stage_table(stages).take(u)
    rule = meets_rule(rows)
    assert 0 < rule.sum() < len(rule)
    for rails in rail_corners(spec):
        vh, vl = FORM.row_levels(stages, u, rails, rows.values)
        bounds = FORM.level_bounds(stages, u, rails)
        stalled = bounds[2] < bounds[3]
        assert_levels_inside(vh, vl, bounds, stalled, rule)
        if rails == nominal:
            nominal_bounds = (loop.vh_lo, loop.vh_hi, loop.vl_lo, loop.vl_hi)
            assert_levels_inside(vh, vl, nominal_bounds, loop.vl_lo < loop.vl_hi, rule)
        # the model's own high level where it sets the thresholds' distance (the bottom
        # threshold) and at the top peak, on every valid row whose share is within the limit:
        # the span at the bottom threshold above the span's low end, the drive there above
        # the weak drive vh_lo - Ve_hi, the level at the top below vh_hi; with the offsets as
        # catalogued against the stage's loop (nominal rails), at 0 V against level_bounds
        # and the probes' Ve (search.guarantee.probe_loop)
        for centred in (False, True):
            if centred:
                lo_h, hi_h, lo_l, _ = bounds
                ve_hi = np.array([probe_error_voltage(s.opamp, s.load) for s in stages])[u]
            elif rails == nominal:
                lo_h, hi_h, lo_l, ve_hi = loop.vh_lo, loop.vh_hi, loop.vl_lo, loop.ve_hi
            else:
                continue
            row = FORM.predict_rows(stages, u, rows.values, (vh, vl), centred_offsets=centred)
            pred = row.pred
            ok = row.valid & (np.asarray(pred.timing_share) <= spec.limits.max_timing_share)
            bottom = high_at(rows, row, rails, "bottom", centred)
            top = high_at(rows, row, rails, "top", centred)
            assert np.all((bottom + vl >= (lo_h + lo_l) * (1 - REL))[ok])
            assert np.all((bottom - row.ve >= lo_h - ve_hi - 1e-12)[ok])
            assert np.all((top <= hi_h * (1 + REL))[ok])


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_the_fall_delay_exponent_bounds_every_row(spec: Spec, demo: Catalog) -> None:
    # stagelevels' x_max against each open-drain row's own x = γ·d_f/RC'_hi, with the
    # model's terms (physics docstring: d_f = td + τi_lo, τi = 1/(ωt·(1 + ε)), RC'_hi =
    # R3·C1·(1 + 1/(ωt·(R3 + R5 ∥ (R1 + R2))·C1))), on every valid row within the share limit
    rails = rails_from_supply(spec.supply)
    checked = 0
    for rows in (every_row(spec, small_catalog()), sampled_rows(spec, demo, 40000, seed=21)):
        row = predicted(rows, rails)
        pred = row.pred
        open_drain = np.array([s.comparator.is_open_drain for s in rows.stages])[rows.u]
        share_ok = np.asarray(pred.timing_share) <= spec.limits.max_timing_share
        n = np.flatnonzero(row.valid & share_ok & open_drain)
        stages = [rows.stages[i] for i in rows.u[n]]
        r1, r2, r3, c1 = (rows.values[d][n] for d in ("R1", "R2", "R3", "C1"))
        r5 = np.array([s.pull_up_ohm for s in stages])
        wt = 2 * math.pi * np.array([s.opamp.gbw_hz for s in stages])
        hs = np.array([sources(s.comparator, rails)[0] for s in stages])
        _, gamma = high_level(r1, r2, r3, hs, r5, np.array([s.opamp.offset_v for s in stages]))
        d_f = np.array([s.comparator.delay_s for s in stages]) + 1 / (wt * (1 + 1 / (wt * r3 * c1)))
        r_node = r5 * (r1 + r2) / (r5 + r1 + r2)
        x = gamma * d_f / (r3 * c1 * (1 + 1 / (wt * (r3 + r_node) * c1)))
        ve = np.asarray(row.ve)[n]
        fall = high_at(rows, row, rails, "bottom", False)[n] - ve
        rise = -np.asarray(pred.square_low_v)[n] + ve
        bound = [
            fall_delay_exponent(s.opamp, s.pull_up_ohm, s.load, rails, a, b)
            for s, a, b in zip(stages, fall, rise, strict=True)
        ]
        assert np.all(x <= np.array(bound) * (1 + REL))
        checked += len(n)
    assert checked > 1000


def test_levels_hold_the_rows_moved_to_the_probes() -> None:
    # the worst-case probes move every resistor by its tolerance and tempco over the spec's
    # temperatures: level_bounds must still hold those rows' levels
    spec = SPLIT_12V
    rows = every_row(spec, small_catalog())
    for rails in rail_corners(spec):
        bounds = FORM.level_bounds(rows.stages, rows.u, rails)
        spread = (1 + 0.01) * (1 + 100e-6 * 25) - 1
        for z in itertools.product((-1, 1), repeat=3):
            moved = dict(rows.values)
            for d, zd in zip(("R1", "R2", "R3"), z, strict=True):
                moved[d] = rows.values[d] * (1 + zd * spread)
            vh, vl = FORM.row_levels(rows.stages, rows.u, rails, moved)
            assert_levels_inside(vh, vl, bounds, bounds[2] < bounds[3], meets_rule(rows))


# ---- the bounds the search draws from the loop ---------------------------------------------


def assert_bounds_hold(spec: Spec, rows: Rows) -> tuple[int, int]:
    """search.bounds over the stages' StageLoops hold the full model's period and amplitude
    (both ends) on every valid row within the share limit (the rows the bounds are claimed
    for); the number of rows checked and of those with an open-drain U2 or unequal edges."""
    row = predicted(rows, rails_from_supply(spec.supply))
    pred = row.pred
    share = np.asarray(pred.timing_share)
    ok = np.flatnonzero(row.valid & (share <= spec.limits.max_timing_share))
    loop = stage_table(rows.stages).take(rows.u[ok])
    k = rows.values["R1"][ok] / rows.values["R2"][ok]
    p = k * rows.values["R3"][ok] * rows.values["C1"][ok]
    t, a = period_bounds(loop, k, p), amplitude_bounds(loop, k, p, p)
    period, amp = np.asarray(pred.period_s)[ok], np.asarray(pred.amplitude_vpp)[ok]
    slack = 1e-9  # search.rows' guard
    assert np.all(period >= t.lo * (1 - slack)) and np.all(period <= t.hi * (1 + slack))
    assert np.all(amp >= a.lo * (1 - slack)) and np.all(amp <= a.hi * (1 + slack))
    hard = [
        s.comparator.is_open_drain or s.comparator.rise_s != s.comparator.fall_s
        for s in (rows.stages[x] for x in rows.u[ok])
    ]
    return len(ok), int(np.sum(hard))


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_the_search_bounds_hold_every_row(spec: Spec, demo: Catalog) -> None:
    # both ends of both quantities, open drain and unequal edges included (stages.py and
    # stagelevels.py say why)
    hard_rows = 0
    for rows in (every_row(spec, small_catalog()), sampled_rows(spec, demo, 40000, seed=5)):
        checked, hard = assert_bounds_hold(spec, rows)
        assert checked > 50
        hard_rows += hard
    assert hard_rows > 1000


def random_comparators(rng: np.random.Generator, n: int) -> list[Comparator]:
    """Invented comparators: open drain or push-pull, 10-90 % edges 5-500 ns each (rise and
    fall drawn apart), the delay from the edge's half length (an edge that starts at the
    crossing) up to 1 µs later, offsets ±3 mV, bias 0-50 nA."""
    out = []
    for m in range(n):
        rise, fall = np.exp(rng.uniform(np.log(5e-9), np.log(5e-7), 2))
        start = 0.0 if m % 3 == 0 else float(rng.uniform(0.0, 1e-6))
        open_drain = m % 2 == 0
        out.append(
            dataclasses.replace(
                PUSH_PULL, id=f"TC-R{m}", output="open-drain" if open_drain else "push-pull",
                voh_headroom_v=None if open_drain else float(rng.uniform(0.05, 0.5)),
                rise_s=float(rise), fall_s=float(fall),
                delay_s=max(rise, fall) / 0.8 / 2 + start,
                offset_v=float(rng.uniform(-3e-3, 3e-3)), bias_a=float(rng.uniform(0, 5e-8)),
                output_a=float(rng.uniform(6e-3, 2e-2)),
            )
        )  # fmt: skip
    return out


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_the_search_bounds_hold_random_comparators(spec: Spec) -> None:
    # many thousands of rows of invented comparators, unequal edges and edges that start at
    # the crossing (td = τ/2, the overshoot time's floor at 0) among them
    rng = np.random.default_rng(2026)
    catalog = small_catalog(*random_comparators(rng, 12))
    checked, hard = assert_bounds_hold(spec, sampled_rows(spec, catalog, 150000, seed=11))
    assert checked > 5000 and hard > 2000


# ---- (3) stock, cost and BOM lines are the board's ----------------------------------------


def test_stock_cost_and_lines_are_the_boards() -> None:
    # Design.uses/cost_per_board/bom_lines, the topology's own board (common practice: one
    # count by two paths)
    catalog = small_catalog()
    spec = SINGLE_5V
    stages = options(spec, catalog)
    row = {"R1": catalog.get("TR-1K00"), "R2": catalog.get("TR-4K70"),
           "R3": catalog.get("TR-10K0"), "C1": catalog.get("TK-1N00")}  # fmt: skip
    seen: Counter[tuple[bool, int]] = Counter()
    for stage in stages:
        parts: dict[str, Part] = dict(row)
        board = board_of(stage, parts)
        assert board.topology is COMPARATOR_SCHMITT
        own = Counter(p.id for p in parts.values())
        needs = Counter({p.id: n for p, n in stage.stock_needs})
        if "R5" in stage.parts and stage.parts["R5"].id in own:
            continue  # the shared-code case below
        assert board.uses() == needs + own
        cost = stage.cost_per_board + sum(p.unit_cost for p in parts.values())
        assert board.cost_per_board == pytest.approx(cost, rel=REL)
        assert board.bom_lines == stage.lines + len(own)
        assert stage.lines == len(stage.parts)
        seen[("R5" in stage.parts, stage.opamp.channels)] += 1
    # open drain and push-pull, a dual and a single U1 (one channel: one package either way)
    assert set(seen) == {(False, 1), (False, 2), (True, 1), (True, 2)}
    # a pull-up whose stock code also fills R1: one piece per position, one BOM line
    stage = next(s for s in stages if "R5" in s.parts and s.parts["R5"].id == "TR-1K00")
    board = board_of(stage, row)
    assert board.uses()["TR-1K00"] == 2
    assert board.bom_lines == stage.lines + len({p.id for p in row.values()}) - 1


# ---- (4) exclusions name the reason -------------------------------------------------------


def test_exclusions_name_the_reason() -> None:
    catalog = small_catalog(
        dataclasses.replace(PUSH_PULL, id="TC-NS", stock=3),
        dataclasses.replace(PUSH_PULL, id="TC-HR", voh_headroom_v=3.0),
        extra_opamps=(
            dataclasses.replace(OPAMP, id="TA-NS", stock=5),
            dataclasses.replace(OPAMP, id="TA-LV", supply_max_v=5.5),
            dataclasses.replace(OPAMP, id="TA-IB", bias_a=0.01),
        ),
    )
    short = resistor("TR-2K20", 2.2e3, stock=4)
    catalog = dataclasses.replace(catalog, resistors=(*catalog.resistors, short))
    for spec, want in (
        (SINGLE_5V, {
            ("U1", "TA-NS"): "stock 5 < 10",
            ("U2", "TC-NS"): "stock 3 < 10",
            ("R5", "TR-2K20"): "stock 4 < 10",
            ("U2", "TC-HR"): "cannot swing both sides of the reference",
            # Ohm's law: (V+ - V- - VOL)/R5
            ("R5", "TR-100R"): f"with U2 TC-OD it sinks {(5 - 0.25) / 100:.3g} A > 0.006 A",
            ("U1", "TA-IB"): "with U1 TA-IB and U2 TC-PP the integrator error voltage",
        }),
        (SPLIT_12V, {
            ("U1", "TA-LV"): "supply span 22.8..25.2 V is outside its rating 2.5..5.5 V",
            ("U2", "TC-PPA"): "supply span 22.8..25.2 V is outside its rating 2.7..5.5 V",
            ("R5", "TR-1K00"): f"with U2 TC-OD it sinks {(24 - 0.25) / 1e3:.3g} A > 0.006 A",
        }),
    ):  # fmt: skip
        res, _ = eligible_resistors(spec, catalog)
        stages, excl = FORM.stage_options(spec, catalog, res.value)
        found: dict[tuple[str, str | None], list[str]] = defaultdict(list)
        for e in excl:
            found[e.designator, e.part_id].append(e.reason)
        for key, reason in want.items():
            assert any(reason in r for r in found[key]), (key, found[key])
        used = {(d, p.id) for s in stages for d, p in s.parts.items()}
        assert not used & set(want)
        assert [s.index for s in stages] == list(range(len(stages)))


def test_the_spec_limits_u1() -> None:
    spec = spec_of(5, 0, 50e3, 2, opamps=["TA-S1"])
    stages = options(spec, small_catalog())
    assert stages and {s.opamp.id for s in stages} == {"TA-S1"}


# ---- (5) the stage of a chosen board ------------------------------------------------------

TIMING = ("slew_rise", "slew_fall", "delay", "gbw", "integrator_gbw")
LEVELS = ("vh_lo", "vh_hi", "vl_lo", "vl_hi")


@pytest.mark.parametrize("spec", [SINGLE_5V, SPLIT_12V], ids=["5V", "pm12V"])
def test_a_chosen_board_gets_its_stage_back(spec: Spec) -> None:
    catalog = small_catalog()
    rows = sampled_rows(spec, catalog, 400, seed=3)
    rails = rails_from_supply(spec.supply)
    original = predicted(rows, rails)
    again = 0
    for n, board in rows.boards():
        stage = rows.stages[rows.u[n]]
        back = FORM.board_stage(board, spec)
        assert isinstance(back, ComparatorStage) and back.index == 0
        assert {d: p.id for d, p in back.parts.items()} == {d: p.id for d, p in stage.parts.items()}
        ve = stage.opamp.offset_v + stage.opamp.bias_a * rows.values["R3"][n]
        assert float(back.loop.ve_lo) == float(back.loop.ve_hi) == pytest.approx(ve, rel=REL)
        for f in ("delay", "gbw", "integrator_gbw"):
            assert float(getattr(back.loop, f)) == float(getattr(stage.loop, f)), f
        assert back.levels == stage.levels
        same = all(
            float(getattr(back.loop, f)) == float(getattr(stage.loop, f)) for f in TIMING + LEVELS
        )
        # a stalled open-drain stage's vh_lo follows the Ve range (stagelevels): the only
        # difference allowed, and then the board's own row lies inside its levels
        assert same or stage.comparator.is_open_drain
        again += same
        values = {d: x[n : n + 1] for d, x in rows.values.items()}
        zero = np.zeros(1, dtype=np.int64)
        vh, vl = FORM.row_levels([back], zero, rails, values)
        bounds = (back.loop.vh_lo, back.loop.vh_hi, back.loop.vl_lo, back.loop.vl_hi)
        rule = np.array([not breaks_the_stiffness_rule(board)])
        assert_levels_inside(
            vh, vl, tuple(np.atleast_1d(b) for b in bounds), np.array([True]), rule
        )
        row = FORM.predict_rows([back], zero, values, (vh, vl))
        assert bool(row.valid[0]) == bool(original.valid[n])
        if row.valid[0]:
            got = float(np.asarray(row.pred.frequency_hz)[0])
            want = float(np.asarray(original.pred.frequency_hz)[n])
            assert got == want
    assert again > 200


def test_a_board_that_cannot_work_says_why() -> None:
    catalog = small_catalog(dataclasses.replace(PUSH_PULL, id="TC-HR", voh_headroom_v=3.0))
    row = {"R1": catalog.get("TR-1K00"), "R2": catalog.get("TR-4K70"),
           "R3": catalog.get("TR-10K0"), "C1": catalog.get("TK-1N00")}  # fmt: skip
    stage = options(SPLIT_12V, catalog)[0]
    high = catalog.get("TC-HR")
    lifted = dataclasses.replace(stage, comparator=high, parts={**stage.parts, "U2": high})
    board = board_of(lifted, row)
    assert "both sides of the reference" in str(FORM.board_stage(board, SINGLE_5V))
    open_drain = next(s for s in options(SPLIT_12V, catalog) if s.comparator.is_open_drain)
    bare = dataclasses.replace(board_of(open_drain, row), r5=None)
    why = FORM.board_stage(bare, SPLIT_12V)
    assert why == "R5: the open-drain U2 TC-OD needs a pull-up resistor"


# ---- the demo board, on the topology's own demo rails ---------------------------------


def test_the_demo_board_is_a_row_of_a_stage_option(demo: Catalog) -> None:
    # what tests/circuits/test_searchform_contract.py asks of every form, on the comparator
    # loop's demo rails (that test's demo spec is ±12 V, where the demo board's 5.5 V U2 is
    # rightly not an option)
    v_pos, v_neg = COMPARATOR_SCHMITT.demo_rails
    spec = spec_of(v_pos, v_neg, 18e3, 2)
    board = {d: demo.get(i) for d, i in COMPARATOR_SCHMITT.demo_board.items()}
    stages = options(spec, demo)
    want = {d: board[d].id for d in FORM.stage_designators if d in board}
    found = [s for s in stages if {d: p.id for d, p in s.parts.items()} == want]
    assert len(found) == 1
    rails = rails_from_supply(spec.supply)
    values = {d: np.array([board[d].value]) for d in ("R1", "R2", "R3", "C1")}
    u = np.array([found[0].index], dtype=np.int64)
    vh, vl = FORM.row_levels(stages, u, rails, values)
    row = FORM.predict_rows(stages, u, values, (vh, vl))
    built = COMPARATOR_SCHMITT.oscillator(board_of(found[0], board), rails).prediction()
    for field in ("frequency_hz", "amplitude_vpp", "duty_high", "timing_share", "peak_high_v"):
        assert float(np.asarray(getattr(row.pred, field))[0]) == pytest.approx(
            float(getattr(built, field)), rel=REL
        )


def test_the_registered_form_searches_open_drain_comparators_too(demo: Catalog) -> None:
    """The search takes push-pull and open-drain U2 (each open-drain U2 with the pull-ups
    R5 its sink current and the stiffness rule allow), its bounds proven; a pull-up that no
    row can keep within the rule (R5 > ρ·r_max/2) is left out with the reason."""
    spec = Spec.model_validate(
        {
            "supply": {"positive_v": 5.0, "negative_v": 0.0},
            "frequency": {"target_hz": 50e3, "tolerance_pct": 3.0},
            "triangle": {"amplitude_vpp": 2.0, "tolerance_pct": 8.0},
            "build": {"boards": 10},
        }
    )
    form = COMPARATOR_SCHMITT.search_form()
    assert isinstance(form, ComparatorSchmittForm) and form.open_drain and form.bounds_proven
    stages, excl = form.stage_options(spec, demo, np.array([1e3, 1e5]))
    assert [s.index for s in stages] == list(range(len(stages)))
    od = {c.id for c in demo.comparators if c.is_open_drain}
    pulled = [s for s in stages if "R5" in s.parts]
    assert pulled and {s.comparator.id for s in pulled} == od
    assert any(not s.comparator.is_open_drain for s in stages)
    r_max = spec.limits.resistance_max_ohm
    assert all(s.pull_up_ohm <= PULL_UP_LOAD_SHARE * r_max / 2 for s in pulled)
    heavy = [e for e in excl if e.designator == "R5" and "stiffness rule" in e.reason]
    assert heavy and all(
        demo.get(str(e.part_id)).value_ohm > PULL_UP_LOAD_SHARE * r_max / 2 for e in heavy
    )
