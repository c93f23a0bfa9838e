"""The comparator-IC loop's input common-mode condition in the search
(``circuits.comparator_schmitt.commonmode``): the search's row mask against the topology's own
check, and the k ceiling's bound (its inequalities (C1), (C2) and the result) on random rows.

References: the topology's own check (``checks.input_checks``, code input_common_mode) and
model (``physics.predict``); the ceiling's derivation in ``commonmode``'s docstring, checked
here inequality by inequality.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from tristock.circuits.board import board_from
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT
from tristock.circuits.comparator_schmitt.checks import input_checks
from tristock.circuits.comparator_schmitt.commonmode import divider_ceiling
from tristock.circuits.comparator_schmitt.point import oscillator_of
from tristock.circuits.comparator_schmitt.searchform import ComparatorSchmittForm
from tristock.circuits.comparator_schmitt.stagelevels import sources, threshold_level_floor
from tristock.circuits.comparator_schmitt.stages import ComparatorStage
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.searchform import RowModel
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.model import build_model
from tristock.search.parts import eligible_capacitors, eligible_resistors
from tristock.spec.loading import load_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor

FULL = COMPARATOR_SCHMITT.search_form()
BARE = ComparatorSchmittForm(COMPARATOR_SCHMITT, common_mode=False)
assert isinstance(FULL, ComparatorSchmittForm) and FULL.common_mode


def spec_of(v_pos: float, v_neg: float, f: float, a: float) -> Spec:
    return Spec.model_validate(
        {
            "circuit": {"schmitt": "comparator"},
            "supply": {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": 5},
            "frequency": {"target_hz": f, "tolerance_pct": 3},
            "triangle": {"amplitude_vpp": a, "tolerance_pct": 8},
            "environment": {"temp_min_c": 0, "temp_max_c": 50},
            "build": {"boards": 1},
        }
    )


DEMO_SPEC = load_spec(example_spec_path("comparator"))
SPECS = {
    "demo": DEMO_SPEC.model_copy(
        update={"build": DEMO_SPEC.build.model_copy(update={"boards": 1})}
    ),
    "5V-big": spec_of(5, 0, 20e3, 3.0),
    "3V3": spec_of(3.3, 0, 50e3, 1.0),
    "pm5V": spec_of(5, -5, 10e3, 6.0),
}


@pytest.fixture(scope="module")
def demo() -> Catalog:
    """The demo stock room with every comparator in stock (the micropower one has none)."""
    catalog = load_catalog(demo_catalog_dir())
    comparators = tuple(dataclasses.replace(c, stock=1000) for c in catalog.comparators)
    return dataclasses.replace(catalog, comparators=comparators, path=Path("demo-stocked"))


Row = dict[str, Part]


def random_rows(
    spec: Spec, catalog: Catalog, n: int, seed: int
) -> tuple[list[ComparatorStage], list[Row]]:
    """``n`` rows (stage, R1, R2, R3, C1) drawn (seeded) from the full form's stage options,
    R1 below R2 (k < 1, where these loops are built)."""
    res, _ = eligible_resistors(spec, catalog)
    caps, _ = eligible_capacitors(spec, catalog, "C1")
    stages, _ = FULL.stage_options(spec, catalog, res.value)
    rng = np.random.default_rng(seed)
    rows: list[Row] = []
    picked: list[ComparatorStage] = []
    while len(rows) < n:
        u = int(rng.integers(len(stages)))
        i1, i2, i3 = (int(x) for x in rng.integers(len(res), size=3))
        if res.value[i1] >= res.value[i2]:
            continue
        j = int(rng.integers(len(caps)))
        stage = stages[u]
        assert isinstance(stage, ComparatorStage)
        picked.append(stage)
        rows.append({"R1": res.parts[i1], "R2": res.parts[i2], "R3": res.parts[i3],
                     "C1": caps.parts[j]})  # fmt: skip
    return picked, rows


def value(part: Part) -> float:
    assert isinstance(part, Resistor | Capacitor)
    return part.value


def row_models(spec: Spec, stages: list[ComparatorStage], rows: list[Row]) -> list[RowModel]:
    """(bare, full): each form's RowModel of the rows at nominal values and rails."""
    rails = rails_from_supply(spec.supply)
    values = {d: np.array([value(r[d]) for r in rows]) for d in ("R1", "R2", "R3", "C1")}
    u = np.arange(len(rows), dtype=np.int64)
    out = []
    for form in (BARE, FULL):
        levels = form.row_levels(stages, u, rails, values)
        out.append(form.predict_rows(stages, u, values, levels))
    return out


@pytest.mark.parametrize("name", list(SPECS))
def test_the_row_mask_is_the_check(name: str, demo: Catalog) -> None:
    """A row the bare model accepts is accepted with the common-mode condition exactly when
    the topology's check gives no input_common_mode error (``checks.input_checks``)."""
    spec = SPECS[name]
    rails = rails_from_supply(spec.supply)
    stages, rows = random_rows(spec, demo, 1500, seed=len(name))
    bare, full = row_models(spec, stages, rows)
    assert not (full.valid & ~bare.valid).any()
    seen = {True: 0, False: 0}
    for n in np.flatnonzero(bare.valid):
        board = board_from(COMPARATOR_SCHMITT, {**stages[n].parts, **rows[n]})
        u1 = board.parts()["U1"]
        assert isinstance(u1, OpAmp)
        errors = [w for w in input_checks(oscillator_of(board, rails), u1) if w.severity == "error"]
        assert bool(full.valid[n]) == (not errors), (n, errors)
        seen[not errors] += 1
        if full.valid[n]:
            assert float(full.pred.frequency_hz[n]) == float(bare.pred.frequency_hz[n])
        else:
            assert np.isnan(full.pred.frequency_hz[n])
    if name in ("demo", "5V-big"):  # a 5 V single supply: both outcomes are met
        assert min(seen.values()) > 20, seen


@pytest.mark.parametrize("name", list(SPECS))
def test_the_ceiling_bounds_every_row(name: str, demo: Catalog) -> None:
    """(C1), (C2) and the bounds of ``commonmode``'s docstring on random oscillating rows:
    the peaks past their thresholds, the high level at the top peak at least H_min, U2's +
    input beyond the k-monotone ends; and every row above its stage's ceiling fails the
    check (the full form marks it invalid)."""
    spec = SPECS[name]
    rails = rails_from_supply(spec.supply)
    stages, rows = random_rows(spec, demo, 1500, seed=7 + len(name))
    bare, full = row_models(spec, stages, rows)
    above = 0
    for n in np.flatnonzero(bare.valid):
        s, p = stages[n], bare.pred
        r1, r2 = value(rows[n]["R1"]), value(rows[n]["R2"])
        k = r1 / r2
        hs, low = sources(s.comparator, rails)
        h_min = threshold_level_floor(s.opamp, s.comparator, s.pull_up_ohm, s.load, rails)
        th_hi, th_lo = float(p.threshold_high_v[n]), float(p.threshold_low_v[n])
        hi, lo = float(p.peak_high_v[n]), float(p.peak_low_v[n])
        tol = 1e-12 * max(1.0, abs(hs))  # rounding (common practice)
        assert hi >= th_hi - tol and lo <= th_lo + tol  # (C1)
        r5 = s.pull_up_ohm
        r3 = value(rows[n]["R3"])
        gamma = r5 / (r1 + r2) / (1 + r5 / (r1 + r2) + r5 / r3) if r5 else 0.0
        th_mid = (th_hi + th_lo) / 2
        h_top = float(p.square_high_v[n]) + gamma * (hi - th_mid)
        assert h_top >= h_min - tol  # (C2)
        u2 = s.comparator
        j = u2.bias_a * r1 * r2 / (r1 + r2)
        assert j * u2.bias_a >= 0.0 and abs(j) <= abs(u2.bias_a) * s.load.r_hi / 2
        top = (r2 * hi + r1 * h_top) / (r1 + r2)
        bottom = (r2 * lo - r1 * low) / (r1 + r2)
        share = k / (1 + k) * (low + h_min)
        assert top >= u2.offset_v + j + share - tol
        assert bottom <= u2.offset_v + j - share + tol
        k_max, _ = s.k_ceiling
        if k > k_max:
            above += 1
            assert not full.valid[n], (n, k, k_max)
    if name == "demo":
        assert above > 20


def test_the_ceiling_is_monotone_in_the_levels() -> None:
    """A wider square (a larger L + H_min) or a narrower common-mode range lowers the ceiling;
    none above the range's room, none at all without room (``divider_ceiling``)."""
    catalog = load_catalog(demo_catalog_dir())
    u2 = next(c for c in catalog.comparators if c.id == "GC-PP1F")
    rails = rails_from_supply(SPECS["demo"].supply)
    hs, _ = sources(u2, rails)
    ceilings = [divider_ceiling(u2, rails, h, 1e6)[0] for h in (hs - 0.5, hs, hs + 0.5)]
    assert ceilings[0] > ceilings[1] > ceilings[2] > 0.0
    narrower = dataclasses.replace(u2, input_cm_pos_headroom_v=1.5)
    assert divider_ceiling(narrower, rails, hs, 1e6)[0] < ceilings[1]
    none_left = dataclasses.replace(u2, input_cm_pos_headroom_v=2.6)  # top below the reference
    k_max, words = divider_ceiling(none_left, rails, hs, 1e6)
    assert k_max == 0.0 and "no R1/R2 pair" in words
    rail_to_rail = dataclasses.replace(u2, input_cm_neg_v=None, input_cm_pos_headroom_v=None)
    assert divider_ceiling(rail_to_rail, rails, hs, 1e6)[0] > ceilings[1]


def test_stages_without_room_are_dropped_and_named(demo: Catalog) -> None:
    """The reference outside U2's range or U1's (the stage options), and a ceiling below the
    amplitude's k window (the search model), each leave the stage out with a reason naming
    the part."""
    spec = SPECS["demo"]
    tight = dataclasses.replace(
        next(c for c in demo.comparators if c.id == "GC-PP1F"), id="TC-TIGHT",
        input_cm_pos_headroom_v=2.0,
    )  # fmt: skip
    high = dataclasses.replace(tight, id="TC-HIGH", input_cm_neg_v=2.6)
    narrow_u1 = dataclasses.replace(demo.opamps[0], id="TA-NARROW", input_cm_pos_headroom_v=2.6)
    catalog = dataclasses.replace(demo, comparators=(tight, high), opamps=(*demo.opamps, narrow_u1))
    model = build_model(spec, catalog, COMPARATOR_SCHMITT)
    reasons = {(e.designator, e.part_id): e.reason for e in model.exclusions}
    assert "common-mode range" in reasons["U2", "TC-HIGH"]
    assert "reference" in reasons["U2", "TC-HIGH"]
    assert "common-mode range" in reasons["U1", "TA-NARROW"]
    assert "holds its + input" in reasons["U2", "TC-TIGHT"]
    assert not model.opamps
    assert [o.index for o in model.opamps] == list(range(len(model.opamps)))
