"""The fields every topology's spread box moves (``Topology.spread``): each exists on the
topology's point, and moving it alone by a small step of its own sort moves the prediction
(frequency, amplitude, duty or the triangle's midpoint). A finer check than the contract
test's (which moves whole variables): no field a variable names is dead in ``predict``."""

from __future__ import annotations

import dataclasses

import pytest

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import resolve_board
from tristock.examples import demo_catalog_dir
from tristock.spec.loading import parse_spec
from tristock.stock.catalog import load_catalog

# step per field: 1 % of a relative quantity, 1 mV / 1 nA / 1 mV of an absolute one
ABSOLUTE_STEP = {"vos1": 1e-3, "vos2": 1e-3, "ib1": 1e-9, "ib2": 1e-9, "vt_therm": 1e-3}


@pytest.mark.parametrize("name", sorted(TOPOLOGIES))
def test_declared_fields_exist_and_move_the_prediction(name: str) -> None:
    topology = TOPOLOGIES[name]
    board = resolve_board(topology, dict(topology.demo_board), load_catalog(demo_catalog_dir()))
    v_pos, v_neg = topology.demo_rails
    spec = parse_spec(
        {
            "supply": {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": 5.0},
            "frequency": {"target_hz": 1e3, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 2.0, "tolerance_pct": 5.0},
            "environment": {"temp_min_c": -20.0, "temp_max_c": 70.0},
        }
    )
    box = topology.spread(board, spec)
    point, v_ref = box.centre, None if v_neg < 0 else (v_pos + v_neg) / 2
    base = topology.predict(point, v_ref)
    fields = {f.name for f in dataclasses.fields(point)}
    for variable in box.variables:
        assert set(variable.fields) <= fields, variable.name
        for field in (m.field for m in variable.moves if m.amount != 0):  # 0: moves nothing
            value = getattr(point, field)
            moved = value + ABSOLUTE_STEP[field] if field in ABSOLUTE_STEP else value * 1.01
            after = topology.predict(dataclasses.replace(point, **{field: moved}), v_ref)
            change = max(
                abs(float(after.frequency_hz) / float(base.frequency_hz) - 1),
                abs(float(after.amplitude_vpp) / float(base.amplitude_vpp) - 1),
                abs(float(after.duty_high) - float(base.duty_high)),
                abs(float(after.offset_v) - float(base.offset_v)),  # Vos2 moves only this
            )
            assert change > 1e-9, f"{variable.name}: {field} does not move the prediction"
