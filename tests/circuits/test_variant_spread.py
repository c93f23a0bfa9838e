"""The spread variables the clamped and set-duty topologies declare (``spread`` in each
package): every field they name exists on the topology's point, and moving it by the
variable's own sort of step moves the prediction (frequency, amplitude, duty or the
triangle's midpoint)."""

from __future__ import annotations

import dataclasses

import pytest

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import resolve_board
from tristock.circuits.clamped_schmitt.spread import SPREAD_VARIABLES as CLAMPED
from tristock.circuits.duty_schmitt.spread import SPREAD_VARIABLES as DUTY
from tristock.circuits.rails import Rails
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import load_catalog

DECLARED = {"clamped_schmitt": CLAMPED, "duty_schmitt": DUTY}
# step per field: 1 % of a relative quantity, 1 mV / 1 nA of an absolute one
ABSOLUTE_STEP = {"vos1": 1e-3, "vos2": 1e-3, "ib1": 1e-9, "ib2": 1e-9}


@pytest.mark.parametrize("name", sorted(DECLARED))
def test_declared_fields_exist_and_move_the_prediction(name: str) -> None:
    topology = TOPOLOGIES[name]
    board = resolve_board(topology, dict(topology.demo_board), load_catalog(demo_catalog_dir()))
    rails = Rails(*topology.demo_rails)
    point = topology.board_point(board, rails, 25.0)
    base = topology.predict(point, rails.v_ref)
    fields = {f.name for f in dataclasses.fields(point)}
    for variable in DECLARED[name]:
        assert set(variable.fields) <= fields, variable.name
        for field in variable.fields:
            value = getattr(point, field)
            moved = value + ABSOLUTE_STEP[field] if field in ABSOLUTE_STEP else value * 1.01
            after = topology.predict(dataclasses.replace(point, **{field: moved}), rails.v_ref)
            change = max(
                abs(float(after.frequency_hz) / float(base.frequency_hz) - 1),
                abs(float(after.amplitude_vpp) / float(base.amplitude_vpp) - 1),
                abs(float(after.duty_high) - float(base.duty_high)),
                abs(float(after.offset_v) - float(base.offset_v)),  # Vos2 moves only this
            )
            assert change > 1e-9, f"{variable.name}: {field} does not move the prediction"
