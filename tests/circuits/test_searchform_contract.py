"""Every topology's search form keeps its contract (``tristock.circuits.searchform``).

Parametrized over the topologies of ``tristock.circuits.TOPOLOGIES`` that have a search form
(``Topology.search_form()`` not None; the others are not searchable yet). On the bundled demo
stock room and the bundled demo spec (on the topology's own demo rails), each topology's search
form must: name designators of
its topology; offer its demo board's stage among its stage options, with stock and cost taken
from that stage's parts; give the demo board's row square levels inside that stage's level
intervals; and predict the demo board's row exactly as the topology's own built oscillator
does (the same full model through two paths: 1e-12 relative, common practice for one formula
evaluated twice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import resolve_board
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.searchform import SearchForm, StageOption
from tristock.circuits.topology import Topology
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog

NAMES = sorted(name for name, t in TOPOLOGIES.items() if t.search_form() is not None)


def form_of(topology: Topology) -> SearchForm:
    form = topology.search_form()
    assert isinstance(form, SearchForm)
    assert form is not None, topology.name
    return form


def test_the_op_amp_loop_is_searchable() -> None:
    assert "opamp_schmitt" in NAMES


@pytest.fixture(scope="module")
def demo() -> Catalog:
    return load_catalog(demo_catalog_dir())


@pytest.fixture(scope="module")
def spec() -> Spec:
    return load_spec(example_spec_path("demo"))


def on_demo_rails(topology: Topology, spec: Spec) -> Spec:
    """``spec`` on the topology's demo rails (a 2/5 of the span triangle where they differ)."""
    vp, vn = topology.demo_rails
    if (vp, vn) == (spec.supply.positive_v, spec.supply.negative_v):
        return spec
    data = spec.model_dump(mode="json")
    data["supply"].update(positive_v=vp, negative_v=vn)
    data["triangle"]["amplitude_vpp"] = 0.4 * (vp - vn)
    return Spec.model_validate(data)


def demo_stage(topology: Topology, spec: Spec, demo: Catalog) -> tuple[int, list[StageOption]]:
    form = form_of(topology)
    spec = on_demo_rails(topology, spec)
    r3 = np.array([demo.get(topology.demo_board[d]).value for d in form.integrator])
    stages, _ = form.stage_options(spec, demo, r3)
    want = {d: topology.demo_board[d] for d in form.stage_designators if d in topology.demo_board}
    found = [s.index for s in stages if {d: p.id for d, p in s.parts.items()} == want]
    assert len(found) == 1, f"{topology.name}: the demo board's stage is not one option"
    return found[0], stages


@pytest.mark.parametrize("name", NAMES)
def test_the_form_names_designators_of_its_topology(name: str) -> None:
    topology = TOPOLOGIES[name]
    form = form_of(topology)
    named = (*form.stage_designators, *form.divider, *form.integrator, form.capacitor)
    assert set(named) <= set(topology.designators)
    assert len(set(named)) == len(named)


@pytest.mark.parametrize("name", NAMES)
def test_stage_options_carry_their_parts(name: str, spec: Spec, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    u, stages = demo_stage(topology, spec, demo)
    assert [s.index for s in stages] == list(range(len(stages)))
    for stage in stages:
        assert set(stage.parts) <= set(form_of(topology).stage_designators)
        needed = {p.id for p, _ in stage.stock_needs}
        assert needed == {p.id for p in stage.parts.values()}
        assert all(n >= 1 and p.stock >= n * spec.build.boards for p, n in stage.stock_needs)
        assert stage.cost_per_board >= min(p.unit_cost for p in stage.parts.values())
        assert 1 <= stage.lines <= len(stage.parts)
        loop = stage.loop
        assert float(loop.vh_lo) <= float(loop.vh_hi) and float(loop.vl_lo) <= float(loop.vl_hi)
        assert float(loop.ve_lo) <= float(loop.ve_hi)
    assert stages[u].key


@pytest.mark.parametrize("name", NAMES)
def test_the_demo_row_matches_the_built_oscillator(name: str, spec: Spec, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    form = form_of(topology)
    u, stages = demo_stage(topology, spec, demo)
    rails = rails_from_supply(on_demo_rails(topology, spec).supply)
    design = resolve_board(topology, dict(topology.demo_board), demo)
    names = (*form.divider, *form.integrator, form.capacitor)
    values = {d: np.array([demo.get(topology.demo_board[d]).value]) for d in names}
    rows = np.array([u], dtype=np.int64)
    vh, vl = form.row_levels(stages, rows, rails, values)
    loop = stages[u].loop
    assert float(loop.vh_lo) <= vh[0] <= float(loop.vh_hi)
    assert float(loop.vl_lo) <= vl[0] <= float(loop.vl_hi)
    lo = form.level_bounds(stages, rows, rails)
    assert lo[0][0] <= vh[0] <= lo[1][0] and lo[2][0] <= vl[0] <= lo[3][0]
    row = form.predict_rows(stages, rows, values, (vh, vl))
    assert row.valid[0]
    built = topology.oscillator(design, rails).prediction()
    for field in ("frequency_hz", "amplitude_vpp", "duty_high", "timing_share", "peak_high_v"):
        got = float(np.asarray(getattr(row.pred, field))[0])
        assert math.isclose(got, float(getattr(built, field)), rel_tol=1e-12), field


@pytest.mark.parametrize("name", NAMES)
def test_the_demo_pairs_levels_lie_inside_the_stages(name: str, spec: Spec, demo: Catalog) -> None:
    """``pair_levels`` of the demo board's pair: inside the stage's intervals and holding the
    demo row's levels; the stage's own where the form does not narrow by pair."""
    topology = TOPOLOGIES[name]
    form = form_of(topology)
    u, stages = demo_stage(topology, spec, demo)
    rails = rails_from_supply(on_demo_rails(topology, spec).supply)
    names = (*form.divider, *form.integrator, form.capacitor)
    values = {d: np.array([demo.get(topology.demo_board[d]).value]) for d in names}
    rows = np.array([u], dtype=np.int64)
    r1, r2 = (values[d] for d in form.divider)
    r3 = float(values[form.integrator[0]][0])
    got = [float(x[0]) for x in form.pair_levels(stages, rows, r1, r2, (r3, r3), rails)]
    loop = stages[u].loop
    own = [float(loop.vh_lo), float(loop.vh_hi), float(loop.vl_lo), float(loop.vl_hi)]
    if not form.levels_by_pair:
        assert got == own
    assert own[0] <= got[0] <= got[1] <= own[1] and own[2] <= got[2] <= got[3] <= own[3]
    vh, vl = form.row_levels(stages, rows, rails, values)
    assert got[0] <= vh[0] <= got[1] and got[2] <= vl[0] <= got[3]
    narrowed = form.pair_loop(loop, tuple(np.array([x]) for x in got))  # type: ignore[arg-type]
    assert [float(x[0]) for x in narrowed[:4]] == got
