"""The zener-clamped loop: the op-amp Schmitt loop with its square taken behind a series
resistor R5 from U1B's output and clamped by back-to-back zeners D1/D2 to the reference, so
the square's levels, and the triangle's amplitude, are ±(Vz + Vf) plus the zeners' rise with
current, not the rails.

Its modules: ``physics`` (the vectorised model), ``oscillator`` (the built circuit), ``board``
(a board at a temperature, its point and its equivalent loop for the simulation),
``checks``, ``netlist`` (ngspice) and ``spread`` (the spread box on a spec).
``CLAMPED_SCHMITT`` is the topology object.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

import numpy as np

from tristock.circuits.checks import Warning
from tristock.circuits.clamped_schmitt.board import (
    board_point,
    loop_from,
    oscillator_of,
    part_at,
)
from tristock.circuits.clamped_schmitt.checks import check
from tristock.circuits.clamped_schmitt.netlist import netlist
from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import ClampPoint, predict_point
from tristock.circuits.clamped_schmitt.spread import SENSITIVITY_FIELDS, spread_box
from tristock.circuits.rails import Rails
from tristock.circuits.spreadvars import SpreadBox
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import (
    BoardParts,
    FloatArray,
    PartRole,
    Prediction,
    Topology,
)
from tristock.spec.model import Spec
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Resistor

SKETCH = r"""
                    +------------R2-----------------------+
                    |                                     |
   triangle  +--R1--+--(+)\                               |
   (U1A out) |         U1B >----R5----+-------------------+---- square (clamped)
             |   ref --(-)/           |                   |
             |                     D1 (zener, cathode up) |
             |                        |                   |
             |                     D2 (zener, cathode to ref)
             |                        |                   |
             |                       ref                  |
             |      +-----C1-----+                        |
             |      |            |                        |
             +------+--(-)\      |                        |
                    |     U1A >--+                        |
              R3 ---+  ref-(+)/      U1A out = triangle   |
              |                                           |
              +-------------------------------------------+
                       U1: U1A and U1B, one dual op amp (or a single-channel part used twice)
"""


class ClampedSchmitt(Topology):
    """U1A integrates the clamped square through R3 into C1; U1B compares the triangle
    (through R1) against the reference with positive feedback from the clamped square
    (through R2); R5 feeds the clamp D1/D2 from U1B's output."""

    name = "clamped_schmitt"
    roles = (
        PartRole("U1", "opamps", "both channels: integrator (A) and Schmitt trigger (B)"),
        PartRole("R1", "resistors", "threshold resistor, triangle to the trigger's + input"),
        PartRole("R2", "resistors", "threshold feedback resistor, clamped square to the + input"),
        PartRole("R3", "resistors", "integrator input resistor, clamped square to C1"),
        PartRole("R5", "resistors", "series resistor from U1B's output to the clamp"),
        PartRole("C1", "capacitors", "integrator capacitor"),
        PartRole("D1", "diodes", "zener clamping the square high (in breakdown when high)"),
        PartRole("D2", "diodes", "zener clamping the square low (in breakdown when low)"),
    )
    sketch = SKETCH
    #: Against the simulation of the equivalent loop (``board.loop_from``): frequency and
    #: amplitude, and duty (the demo board measures about 1e-4).
    accuracy = 2e-3
    duty_accuracy = 2e-3
    #: Against ngspice on ``netlist`` (tests/circuits/test_clamped_ngspice.py).
    spice_accuracy = 3e-3
    demo_board = MappingProxyType(
        {
            "U1": "GA-JF2",
            "R1": "R1F-10K0",
            "R2": "R1F-22K1",
            "R3": "R1F-47K5",
            "R5": "R1F-2K00",
            "C1": "CPPG-4N70",
            "D1": "GD-Z5V1-02",
            "D2": "GD-Z5V1-02",
        }
    )
    demo_rails = (12.0, -12.0)
    sensitivity_fields = SENSITIVITY_FIELDS

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        return predict_point(point, v_ref, control)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> ClampPoint:
        return board_point(design, rails, temp_c)

    def oscillator(
        self, design: BoardParts, rails: Rails, temp_c: float = 25.0
    ) -> ClampedOscillator:
        return oscillator_of(design, rails, temp_c)

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        parts = design.parts()
        return check(
            self.oscillator(design, rails),
            opamp=part_at(parts, "U1", OpAmp),
            resistors={r: part_at(parts, r, Resistor) for r in ("R1", "R2", "R3", "R5")},
            capacitor=part_at(parts, "C1", Capacitor),
            zeners={d: part_at(parts, d, Diode) for d in ("D1", "D2")},
        )

    def time_domain(self, oscillator: Any) -> Loop:
        return loop_from(oscillator)

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        """Parts, zeners, rails, T and the op amp (``clamped_schmitt.spread``)."""
        return spread_box(design, spec)

    def drive_imbalance(
        self, point: Any, v_ref: float | None, control: str = "series"
    ) -> FloatArray:
        """Zeros: the clamp, not the rails, sets the square's levels and so the drives (the
        worst case then looks for no balanced-swing point along a rail)."""
        shape = np.broadcast_shapes(np.shape(point.v_pos), np.shape(point.v_neg))
        return np.zeros(shape, dtype=float)

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        return netlist(oscillator, periods=periods)


CLAMPED_SCHMITT = ClampedSchmitt()
