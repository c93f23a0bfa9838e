"""The comparator-IC loop: one op-amp channel integrates (U1, R3, C1), a comparator IC (U2)
with hysteresis from R1 and R2 makes the square; an open-drain U2 is pulled up by R5 from V+.

Its modules: ``physics`` (the closed-form model), ``point`` (the vectorised point and the
built oscillator), ``checks``, ``spread`` (the spread box on a spec), ``timedomain`` (the
loop for the event-driven simulation), ``netlist`` (ngspice), and the search form
(``searchform``, with ``stages``: the stage options U1 × U2 (× R5), and ``stagelevels``: their
square levels over every row). ``COMPARATOR_SCHMITT`` is the topology object.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

from tristock.circuits.checks import Warning
from tristock.circuits.comparator_schmitt.checks import check
from tristock.circuits.comparator_schmitt.netlist import case_of, comparator_netlist
from tristock.circuits.comparator_schmitt.point import (
    ComparatorOscillator,
    ComparatorPoint,
    oscillator_of,
    part_of,
    predict_point,
)
from tristock.circuits.comparator_schmitt.searchform import ComparatorSchmittForm
from tristock.circuits.comparator_schmitt.spread import (
    SENSITIVITY_FIELDS,
    drive_imbalance,
    spread_box,
)
from tristock.circuits.comparator_schmitt.timedomain import loop_of
from tristock.circuits.rails import Rails
from tristock.circuits.searchform import SearchForm
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
from tristock.stock.parts import Capacitor, OpAmp, Resistor, value_at

SKETCH = r"""
              V+ --R5--+   (R5: pull-up, open-drain U2 only)
                       |
                    +--+---------R2-------------+
                    |                           |
   triangle  +--R1--+--(+)\                     |
   (U1 out)  |         U2  >--------------------+---- square
             |   ref --(-)/  comparator IC      |
             |                                  |
             |      +-----C1-----+              |
             |      |            |              |
             +------+--(-)\      |              |
                    |     U1 >---+--------------+ (U1 out = triangle)
              R3 ---+  ref-(+)/   one op-amp channel
              |
   square ----+
"""


class ComparatorSchmitt(Topology):
    """U1 (one op-amp channel) integrates the square through R3 into C1; U2, a comparator IC,
    compares the triangle (through R1) with the reference, with positive feedback from the
    square (through R2). Push-pull U2 drives the square between VOL and V+ - headroom;
    open-drain U2 pulls it to VOL and R5 pulls it up, its high level loaded by R3 and
    R1 + R2."""

    name = "comparator_schmitt"
    roles = (
        PartRole("U1", "opamps", "integrator (one op-amp channel)"),
        PartRole("U2", "comparators", "comparator IC: the Schmitt trigger"),
        PartRole("R1", "resistors", "threshold resistor, triangle to U2's + input"),
        PartRole("R2", "resistors", "threshold feedback resistor, square to U2's + input"),
        PartRole("R3", "resistors", "integrator input resistor, square to C1"),
        PartRole("C1", "capacitors", "integrator capacitor"),
        PartRole("R5", "resistors", "pull-up from V+ (open-drain U2)", optional=True),
    )
    sketch = SKETCH
    #: Against the event-driven simulation (``timedomain``: an ideal integrator, fixed
    #: levels): the demo board's U1 (20 MHz) moves the period by its ε and lag, 9e-4 of the
    #: model's frequency; held to 2e-3 (tests/circuits/test_topology_contract.py).
    accuracy = 2e-3
    duty_accuracy = 2e-3
    #: Against ngspice on ``netlist`` (tests/circuits/test_comparator_ngspice.py).
    spice_accuracy = 3e-3
    #: 18 kHz, about 2 Vpp on a 5 V single supply, fast push-pull dual U2.
    demo_board = MappingProxyType(
        {"U1": "GA-RRC2F", "U2": "GC-PP2F", "R1": "R1F-10K0", "R2": "R1F-24K3",
         "R3": "R1F-12K1", "C1": "CC0-2N70"}
    )  # fmt: skip
    demo_rails = (5.0, 0.0)
    sensitivity_fields = SENSITIVITY_FIELDS

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        """``point`` a ``ComparatorPoint``; ``control`` is unused (no pot in this loop)."""
        return predict_point(point, v_ref)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> ComparatorPoint:
        return oscillator_of(design, rails, temp_c).point

    def oscillator(
        self, design: BoardParts, rails: Rails, temp_c: float = 25.0
    ) -> ComparatorOscillator:
        return oscillator_of(design, rails, temp_c)

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        parts = design.parts()
        r5 = part_of(parts, "R5", Resistor) if "R5" in parts else None
        return check(
            self.oscillator(design, rails),
            part_of(parts, "U1", OpAmp),
            part_of(parts, "C1", Capacitor),
            r5,
        )

    def time_domain(self, oscillator: Any) -> Loop:
        return loop_of(oscillator)

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        """Parts, rails, T, U1's offset and bias, U2's delay, edges, offset and bias
        (``comparator_schmitt.spread``)."""
        return spread_box(design, spec)

    def drive_imbalance(
        self, point: Any, v_ref: float | None, control: str = "series"
    ) -> FloatArray:
        """``control`` is unused (no pot in this loop)."""
        return drive_imbalance(point, v_ref)

    def search_form(self) -> SearchForm:
        """Rows (U1, U2[, R5], R1, R2, R3, C1); the stage is U1 + U2 (+ R5)
        (``comparator_schmitt.searchform``)."""
        return SEARCH_FORM

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        """U1 as today's op-amp macromodel, U2 behavioural (delay, linear edges), R5 and its
        load as they are (``netlist``)."""
        return comparator_netlist(case_of(oscillator, periods=periods))


COMPARATOR_SCHMITT = ComparatorSchmitt()
SEARCH_FORM = ComparatorSchmittForm(COMPARATOR_SCHMITT)

__all__ = ["COMPARATOR_SCHMITT", "ComparatorOscillator", "ComparatorPoint", "value_at"]
