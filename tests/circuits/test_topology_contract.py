"""Every topology keeps the interface's contract (``tristock.circuits.topology``).

Parametrized over ``tristock.circuits.TOPOLOGIES``, never a hand list: a new topology is
tested as soon as it is registered. Each topology's demo board (``demo_board`` on the bundled
demo stock room) must: come from the tables its roles name; be drawn by the sketch with every
designator; predict what the independent time-domain simulation of the same loop measures,
to the topology's stated accuracy; give the same figures through the vectorised ``predict`` as
through the built oscillator; and run in ngspice from its own netlist, agreeing with the model
to ``spice_accuracy`` (the reference: ngspice transient runs); and declare a spread box
(``Topology.spread``) whose variables move the point, and through it ``predict``, exactly as
each variable's declared laws say (the laws are restated here in numpy, not taken from
``circuits.spreadvars``), each designator's tolerance as catalogued.
"""

from __future__ import annotations

import dataclasses
import re
from typing import Any

import numpy as np
import pytest

from ngspice_harness import require_ngspice, run_ngspice
from tristock.analysis.spread import Board, evaluate, point_at, spread_board
from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import Board as PartsBoard
from tristock.circuits.board import resolve_board
from tristock.circuits.opamp_schmitt.netlist import MEASURES
from tristock.circuits.rails import Rails
from tristock.circuits.spreadvars import LAWS, FieldMove, SpreadVariable
from tristock.circuits.topology import TABLES, Topology
from tristock.examples import demo_catalog_dir
from tristock.simulate import simulate
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

KIND_OF_TABLE = {
    "opamps": OpAmp,
    "resistors": Resistor,
    "capacitors": Capacitor,
    "pots": Pot,
    "comparators": Comparator,
    "diodes": Diode,
}
NAMES = sorted(TOPOLOGIES)


@pytest.fixture(scope="module")
def demo() -> Catalog:
    return load_catalog(demo_catalog_dir())


def board_of(topology: Topology, catalog: Catalog) -> tuple[PartsBoard, Rails]:
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


# The spread box ------------------------------------------------------------------------------

#: Deviations each variable is moved to, alone.
DEVIATIONS = (-1.0, -0.37, 0.61, 1.0)


def spread_spec(topology: Topology, design: PartsBoard) -> Spec:
    """A spec around the demo board: its rails ±5 %, -20..70 °C, bands about its prediction."""
    v_pos, v_neg = topology.demo_rails
    predicted = topology.oscillator(design, Rails(v_pos, v_neg)).prediction()
    return parse_spec(
        {
            "supply": {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": 5.0},
            "frequency": {"target_hz": float(predicted.frequency_hz), "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": float(predicted.amplitude_vpp), "tolerance_pct": 5.0},
            "environment": {"temp_min_c": -20.0, "temp_max_c": 70.0},
        }
    )


def moved_by_hand(centre: Any, var: SpreadVariable, z: float) -> dict[str, Any]:
    """The centre's fields with ``var``'s declared moves applied at ``z`` (the laws of the
    ``circuits.spreadvars`` docstring, written out again here)."""
    values = {
        f.name: np.asarray(getattr(centre, f.name), dtype=float) for f in dataclasses.fields(centre)
    }
    t = None if var.temperature is None else var.temperature[0] + var.temperature[1] * z
    for move in var.moves:
        x, a = values[move.field], move.amount
        if move.law == "scale":
            values[move.field] = x * (1.0 + a * z)
        elif move.law == "add":
            values[move.field] = x + a * z
        elif move.law == "tempco":
            assert t is not None
            values[move.field] = x * (1.0 + a * 1e-6 * (t - 25.0))
        else:
            assert move.law == "tempco_abs" and t is not None
            values[move.field] = x + a * (t - 25.0)
    return values


def one_variable(variables: list[SpreadVariable], i: int, z: float) -> np.ndarray:
    row = np.zeros((1, len(variables)))
    row[0, i] = z
    return row


@pytest.fixture(scope="module", params=NAMES)
def spread(
    request: pytest.FixtureRequest, demo: Catalog
) -> tuple[Topology, PartsBoard, Board, list[SpreadVariable]]:
    topology = TOPOLOGIES[request.param]
    design, _ = board_of(topology, demo)
    board, variables = spread_board(design, spread_spec(topology, design))
    return topology, design, board, variables


def test_spread_variables_name_point_fields_and_laws(spread: Any) -> None:
    topology, design, board, variables = spread
    assert dataclasses.is_dataclass(board.point)
    assert type(board.point) is type(
        topology.board_point(design, Rails(*topology.demo_rails), 25.0)
    )
    fields = {f.name for f in dataclasses.fields(board.point)}
    names = [v.name for v in variables]
    assert len(set(names)) == len(names) and variables
    for var in variables:
        assert var.moves, var.name
        for move in var.moves:
            assert isinstance(move, FieldMove) and move.law in LAWS, var.name
            assert move.field in fields, f"{var.name}: {move.field} is not a point field"
        assert isinstance(var.describe(1.0), str) and var.describe(-1.0) != var.describe(1.0)
    # the spec spreads every rail that is not 0 V (a single supply's V- has no tolerance) and
    # a temperature range: the box carries them
    assert sum(v.rail for v in variables) == sum(v != 0 for v in topology.demo_rails)
    assert [v.name for v in variables if v.temperature is not None] == ["T"]
    assert variables[names.index("T")].temperature == (25.0, 45.0)
    for name, sens_fields in topology.sensitivity_fields.items():
        assert sens_fields and set(sens_fields) <= fields, name


def test_spread_variables_move_predict_as_declared(spread: Any) -> None:
    topology, _, board, variables = spread
    centre_pred = topology.predict(board.point, board.v_ref, board.control)
    for i, var in enumerate(variables):
        for z in DEVIATIONS:
            row = one_variable(variables, i, z)
            got = point_at(board, variables, row)
            expected = moved_by_hand(board.point, var, z)
            for field, want in expected.items():
                have = np.asarray(getattr(got, field), dtype=float).reshape(-1)
                np.testing.assert_allclose(
                    have, want.reshape(-1), rtol=1e-15, atol=0, err_msg=f"{var.name}.{field}"
                )
            by_hand = topology.predict(type(board.point)(**expected), board.v_ref, board.control)
            metrics = evaluate(board, variables, row)[0]
            for m, field in enumerate(("frequency_hz", "amplitude_vpp", "duty_high")):
                assert metrics[m] == pytest.approx(float(getattr(by_hand, field)), rel=1e-14), (
                    var.name,
                    z,
                )
        # every variable moves some figure of the prediction (none is ignored by predict)
        at_end = topology.predict(
            point_at(board, variables, one_variable(variables, i, 1.0)), board.v_ref, board.control
        )
        assert any(
            not np.allclose(getattr(at_end, f), getattr(centre_pred, f), rtol=1e-13, atol=0)
            for f in centre_pred._fields
        ), var.name


def test_a_designator_spreads_by_its_catalogued_tolerance(spread: Any) -> None:
    topology, design, _, variables = spread
    parts = design.parts()
    named = [v for v in variables if v.name in topology.designators]
    assert named, "no part tolerance in the box"
    for var in named:
        (move,) = var.moves
        assert move.law == "scale"
        catalogued = parts[var.name].tolerance_pct / 100
        assert move.amount == pytest.approx(catalogued, rel=1e-15), var.name


def test_drive_imbalance_is_affine_in_each_rail(spread: Any) -> None:
    _, _, board, variables = spread
    for i, var in enumerate(variables):
        if not var.rail:
            continue
        rows = np.vstack([one_variable(variables, i, z) for z in (-1.0, 0.0, 1.0)])
        imbalance = np.broadcast_to(board.drive_imbalance(point_at(board, variables, rows)), (3,))
        assert imbalance[1] == pytest.approx(
            (imbalance[0] + imbalance[2]) / 2, rel=1e-12, abs=1e-12
        ), var.name
