"""Every topology keeps the interface's contract (``tristock.circuits.topology``).

Parametrized over ``tristock.circuits.TOPOLOGIES``, never a hand list: a new topology is
tested as soon as it is registered. Each topology's demo board (``demo_board`` on the bundled
demo stock room) must: come from the tables its roles name; be drawn by the sketch with every
designator; predict what the independent time-domain simulation of the same loop measures,
to the topology's stated accuracy; give the same figures through the vectorised ``predict`` as
through the built oscillator; and run in ngspice from its own netlist, agreeing with the model
to ``spice_accuracy`` (the reference: ngspice transient runs).
"""

from __future__ import annotations

import re

import pytest

from ngspice_harness import require_ngspice, run_ngspice
from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import Board, resolve_board
from tristock.circuits.opamp_schmitt.netlist import MEASURES
from tristock.circuits.rails import Rails
from tristock.circuits.topology import TABLES, Topology
from tristock.examples import demo_catalog_dir
from tristock.simulate import simulate
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

KIND_OF_TABLE = {
    "opamps": OpAmp,
    "resistors": Resistor,
    "capacitors": Capacitor,
    "pots": Pot,
    "diodes": Diode,
}
NAMES = sorted(TOPOLOGIES)


@pytest.fixture(scope="module")
def demo() -> Catalog:
    return load_catalog(demo_catalog_dir())


def board_of(topology: Topology, catalog: Catalog) -> tuple[Board, Rails]:
    design = resolve_board(topology, dict(topology.demo_board), catalog)
    return design, Rails(*topology.demo_rails)


def test_the_mapping_is_keyed_by_name() -> None:
    assert NAMES and all(TOPOLOGIES[name].name == name for name in NAMES)


@pytest.mark.parametrize("name", NAMES)
def test_roles_name_catalog_tables(name: str, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    assert len(set(topology.designators)) == len(topology.designators)
    assert set(topology.required) <= set(topology.demo_board)
    for role in topology.roles:
        assert role.table in TABLES
        assert role.role
    for designator, stock_code in topology.demo_board.items():
        part = demo.get(stock_code)
        assert isinstance(part, KIND_OF_TABLE[topology.table_of(designator)]), designator


@pytest.mark.parametrize("name", NAMES)
def test_the_sketch_names_every_designator(name: str) -> None:
    topology = TOPOLOGIES[name]
    sketch = topology.sketch
    for designator in topology.designators:
        ranged = re.fullmatch(r"C(\d+)", designator)
        if ranged and int(ranged[1]) > 2:
            assert "C2..Cn" in sketch  # the range capacitors are drawn as one
            continue
        assert re.search(rf"\b{designator}\b", sketch), designator


@pytest.mark.parametrize("name", NAMES)
def test_vectorised_predict_equals_the_built_oscillator(name: str, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    design, rails = board_of(topology, demo)
    built = topology.oscillator(design, rails).prediction()
    point = topology.board_point(design, rails, 25.0)
    vectorised = topology.predict(point, rails.v_ref, design.control)
    for field in ("frequency_hz", "amplitude_vpp", "duty_high", "offset_v", "timing_share"):
        assert float(getattr(vectorised, field)) == pytest.approx(
            float(getattr(built, field)), rel=1e-12, abs=1e-15
        ), field


@pytest.mark.parametrize("name", NAMES)
def test_predict_agrees_with_the_time_domain(name: str, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    design, rails = board_of(topology, demo)
    osc = topology.oscillator(design, rails)
    predicted = osc.prediction()
    measured = simulate(osc, periods=4, topology=topology).measured
    assert measured.frequency_hz / float(predicted.frequency_hz) - 1 == pytest.approx(
        0, abs=topology.accuracy
    )
    assert measured.amplitude_vpp / float(predicted.amplitude_vpp) - 1 == pytest.approx(
        0, abs=topology.accuracy
    )
    assert measured.duty_high == pytest.approx(
        float(predicted.duty_high), abs=topology.duty_accuracy
    )


@pytest.mark.parametrize("name", NAMES)
def test_checks_run_on_the_demo_board(name: str, demo: Catalog) -> None:
    topology = TOPOLOGIES[name]
    design, rails = board_of(topology, demo)
    found = topology.check(design, rails)
    assert all(w.severity in ("caution", "error") for w in found)
    assert not [w for w in found if w.severity == "error"]  # the demo board is a good one


@pytest.mark.ngspice
@pytest.mark.parametrize("name", NAMES)
def test_the_netlist_runs_in_ngspice_and_agrees(name: str, demo: Catalog) -> None:
    require_ngspice()
    topology = TOPOLOGIES[name]
    design, rails = board_of(topology, demo)
    osc = topology.oscillator(design, rails)
    text = topology.netlist(osc, periods=3)
    meas = run_ngspice(text, timeout_s=120.0)
    assert set(MEASURES) <= set(meas)
    predicted = osc.prediction()
    # ngspice transient run of the topology's own netlist (the reference)
    assert 1.0 / meas["per"] / float(predicted.frequency_hz) - 1 == pytest.approx(
        0, abs=topology.spice_accuracy
    )
    vpp = meas["vtmax"] - meas["vtmin"]
    assert vpp / float(predicted.amplitude_vpp) - 1 == pytest.approx(0, abs=topology.spice_accuracy)
