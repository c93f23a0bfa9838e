"""The set-duty loop: the op-amp Schmitt loop with the integrator's input resistor split in
two steered paths, R3A through signal diode D3 (carries the integrator's current while the
square is high) and R3B through D4 (while it is low). The drives are VH - Vf and VL - Vf; the
high share is about R3A/(R3A + R3B), and a ramp or sawtooth follows from unequal values.

Its modules: ``physics`` (the vectorised model), ``oscillator`` (the built circuit), ``board``
(a board at a temperature, its point and its equivalent loop for the simulation),
``checks``, ``netlist`` (ngspice) and ``spread`` (the spread box on a spec).
``DUTY_SCHMITT`` is the topology object.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

from tristock.circuits.checks import Warning
from tristock.circuits.clamped_schmitt.board import part_at
from tristock.circuits.duty_schmitt.board import board_point, loop_from, oscillator_of
from tristock.circuits.duty_schmitt.checks import check
from tristock.circuits.duty_schmitt.netlist import netlist
from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.duty_schmitt.physics import DutyPoint, predict_point
from tristock.circuits.duty_schmitt.spread import SENSITIVITY_FIELDS, drive_imbalance, spread_box
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
                    +------------R2------------+
                    |                          |
   triangle  +--R1--+--(+)\                    |
   (U1A out) |         U1B >-------------------+---- square
             |   ref --(-)/                    |
             |                                 |
             |      +-----C1-----+             |
             |      |            |             |
             +------+--(-)\      |             |
                    |     U1A >--+  (U1A out = triangle)
                    |  ref-(+)/                |
                    +--<|-- D3 ---- R3A -------+   (D3 conducts while the square is high)
                    +-- D4 -->|---- R3B -------+   (D4 conducts while the square is low)

                       U1: U1A and U1B, one dual op amp (or a single-channel part used twice)
"""


class DutySchmitt(Topology):
    """U1A integrates the square through R3A/D3 (high) or R3B/D4 (low) into C1; U1B is the
    op-amp Schmitt trigger of ``opamp_schmitt`` (R1, R2)."""

    name = "duty_schmitt"
    roles = (
        PartRole("U1", "opamps", "both channels: integrator (A) and Schmitt trigger (B)"),
        PartRole("R1", "resistors", "threshold resistor, triangle to the trigger's + input"),
        PartRole("R2", "resistors", "threshold feedback resistor, square to the + input"),
        PartRole("R3A", "resistors", "integrator input resistor while the square is high"),
        PartRole("R3B", "resistors", "integrator input resistor while the square is low"),
        PartRole("C1", "capacitors", "integrator capacitor"),
        PartRole("D3", "diodes", "signal diode steering R3A's current (square high)"),
        PartRole("D4", "diodes", "signal diode steering R3B's current (square low)"),
    )
    sketch = SKETCH
    #: Against the simulation of the equivalent loop (``board.loop_from``), which switches the
    #: whole integrator current at once: frequency, amplitude and duty.
    accuracy = 2e-3
    duty_accuracy = 2e-3
    #: Against ngspice on ``netlist`` (tests/circuits/test_duty_ngspice.py).
    spice_accuracy = 3e-3
    demo_board = MappingProxyType(
        {
            "U1": "GA-JF2",
            "R1": "R1F-10K0",
            "R2": "R1F-22K1",
            "R3A": "R1F-33K2",
            "R3B": "R1F-100K",
            "C1": "CPPG-4N70",
            "D3": "GD-SW1",
            "D4": "GD-SW1",
        }
    )
    demo_rails = (12.0, -12.0)
    sensitivity_fields = SENSITIVITY_FIELDS

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        return predict_point(point, v_ref, control)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> DutyPoint:
        return board_point(design, rails, temp_c)

    def oscillator(self, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> DutyOscillator:
        return oscillator_of(design, rails, temp_c)

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        parts = design.parts()
        return check(
            self.oscillator(design, rails),
            opamp=part_at(parts, "U1", OpAmp),
            resistors={r: part_at(parts, r, Resistor) for r in ("R1", "R2", "R3A", "R3B")},
            capacitor=part_at(parts, "C1", Capacitor),
            diodes={d: part_at(parts, d, Diode) for d in ("D3", "D4")},
        )

    def time_domain(self, oscillator: Any) -> Loop:
        return loop_from(oscillator)

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        """Parts, diodes, rails, T and the op amp (``duty_schmitt.spread``)."""
        return spread_box(design, spec)

    def drive_imbalance(
        self, point: Any, v_ref: float | None, control: str = "series"
    ) -> FloatArray:
        """The two branch drives' difference (``duty_schmitt.spread.drive_imbalance``);
        ``control`` is unused (no pot in this loop)."""
        return drive_imbalance(point, v_ref)

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        return netlist(oscillator, periods=periods)


DUTY_SCHMITT = DutySchmitt()
