"""The op-amp Schmitt loop, tristock's first topology: an integrator (U1A, R3, C1) driving a
non-inverting Schmitt trigger (U1B, R1, R2) whose square output drives the integrator.

Its modules: ``physics`` (the closed-form model, ``Oscillator``), ``searchform`` (the
stage options and row model the exact search works through), ``point`` (the vectorised
point the analysis moves), ``spread`` (the board's tolerance variables on a spec),
``checks``, ``timedomain`` (the loop for the event-driven simulation) and ``netlist``
(ngspice). ``OPAMP_SCHMITT`` is the topology object.
"""

from __future__ import annotations

import math
from types import MappingProxyType
from typing import Any

from tristock.circuits.checks import Warning
from tristock.circuits.opamp_schmitt.checks import check
from tristock.circuits.opamp_schmitt.netlist import case_from, netlist
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.opamp_schmitt.point import (
    SpreadPoint,
    board_point,
    oscillator_of,
    part_of,
    predict_point,
    swing_imbalance,
)
from tristock.circuits.opamp_schmitt.searchform import SEARCH_FORM
from tristock.circuits.opamp_schmitt.spread import SENSITIVITY_FIELDS, spread_box
from tristock.circuits.opamp_schmitt.timedomain import loop_from
from tristock.circuits.rails import Rails
from tristock.circuits.searchform import SearchForm
from tristock.circuits.spreadvars import SpreadBox
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import BoardParts, FloatArray, PartRole, Prediction, Topology
from tristock.spec.model import Spec
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
                    |     U1A >--+-------------+ (U1A out = triangle)
              R3 ---+  ref-(+)/
              |
   square ----+        U1: U1A and U1B, one dual op amp (or a single-channel part used twice)
                       RV1 (trimmed: in series with R3; tuned: a divider with end stop R4)
                       C2..Cn: range capacitors switched in place of C1 (tuned)
"""


class OpAmpSchmitt(Topology):
    """Two op-amp channels (one dual, or a single-channel part used twice): U1A integrates
    the square through R3 into C1, U1B compares the triangle (through R1) against the
    reference with positive feedback from the square (through R2). The square saturates near
    the rails; the triangle turns at -VH·R1/R2 and +VL·R1/R2."""

    name = "opamp_schmitt"
    roles = (
        PartRole("U1", "opamps", "both channels: integrator (A) and Schmitt trigger (B)"),
        PartRole("R1", "resistors", "threshold resistor, triangle to the trigger's + input"),
        PartRole("R2", "resistors", "threshold feedback resistor, square to the + input"),
        PartRole("R3", "resistors", "integrator input resistor, square to C1"),
        PartRole("C1", "capacitors", "integrator capacitor"),
        PartRole("R4", "resistors", "divider end stop under RV1 (tuned)", optional=True),
        PartRole("RV1", "pots", "timing pot: trimmer or panel control", optional=True),
        *(
            PartRole(f"C{n}", "capacitors", "range capacitor (tuned)", optional=True)
            for n in range(2, 9)
        ),
    )
    sketch = SKETCH
    #: The closed form against the event-driven simulation of the same loop
    #: (tests/circuits/test_topology_contract.py): frequency and amplitude, and duty.
    accuracy = 2e-3
    duty_accuracy = 2e-3
    #: Against the gm-stage macromodels of ``netlist``: the 0.3 % the model is held to against
    #: ngspice (tests/circuits/test_circuit_ngspice.py); the demo board measures 8e-6 in
    #: frequency and 2.5e-5 in amplitude.
    spice_accuracy = 3e-3
    #: Rank 1 of the bundled demo example (2.5 kHz, 6 Vpp on ±12 V).
    demo_board = MappingProxyType(
        {"U1": "GA-JF2", "R1": "R0B-21K5", "R2": "R1F-78K7", "R3": "R1F-158K", "C1": "CPPG-2N20"}
    )
    demo_rails = (12.0, -12.0)
    sensitivity_fields = SENSITIVITY_FIELDS

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        return predict_point(point, v_ref, control)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> SpreadPoint:
        return board_point(design, rails, temp_c)

    def oscillator(self, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Oscillator:
        return oscillator_of(design, rails, temp_c)

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        parts = design.parts()
        return check(
            self.oscillator(design, rails),
            capacitor=part_of(parts, "C1", Capacitor),
            resistors={r: part_of(parts, r, Resistor) for r in ("R1", "R2", "R3")},
            opamp_part=part_of(parts, "U1", OpAmp),
        )

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        return spread_box(design, spec)

    def drive_imbalance(
        self, point: Any, v_ref: float | None, control: str = "series"
    ) -> FloatArray:
        return swing_imbalance(point, v_ref, control)

    def time_domain(self, oscillator: Any) -> Loop:
        return loop_from(oscillator)

    def search_form(self) -> SearchForm:
        """Rows (U1, R1, R2, R3, C1); the stage is U1 (``opamp_schmitt.searchform``)."""
        return SEARCH_FORM

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        """The board's own comparator: the op-amp macromodel when its GBW is finite and both
        slew rates agree, else the slew-limited decision (or the ideal one)."""
        m = oscillator.opamp
        if math.isfinite(m.gbw_hz) and m.slew_rise_v_per_s == m.slew_fall_v_per_s:
            kind = "macro"
        elif math.isfinite(m.slew_rise_v_per_s) and math.isfinite(m.slew_fall_v_per_s):
            kind = "slew"
        else:
            kind = "ideal"
        return netlist(case_from(oscillator, kind, periods=periods))


OPAMP_SCHMITT = OpAmpSchmitt()
