"""The set-duty loop: the op-amp Schmitt loop with the integrator's input resistor split in
two steered paths, R3A through signal diode D3 (carries the integrator's current while the
square is high) and R3B through D4 (while it is low). The drives are VH - Vf and VL - Vf; the
high share is about R3A/(R3A + R3B), and a ramp or sawtooth follows from unequal values.

Its modules: ``physics`` (the vectorised model), ``oscillator`` (the built circuit: a board
at a temperature, its point), ``timedomain`` (its equivalent loop for the simulation),
``checks``, ``netlist`` (ngspice), ``spread`` (the spread box on a spec) and
``searchform`` (what the exact search needs). ``DUTY_SCHMITT``
is the topology object, an ``opampvariant.OpAmpVariant`` delegating to these modules.
"""

from __future__ import annotations

from types import MappingProxyType

from tristock.circuits.duty_schmitt.checks import check
from tristock.circuits.duty_schmitt.netlist import netlist
from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.duty_schmitt.physics import predict_point
from tristock.circuits.duty_schmitt.searchform import SEARCH_FORM
from tristock.circuits.duty_schmitt.spread import SENSITIVITY_FIELDS, drive_imbalance, spread_box
from tristock.circuits.duty_schmitt.timedomain import loop_from
from tristock.circuits.opampvariant import OpAmpVariant, VariantFunctions
from tristock.circuits.searchform import SearchForm
from tristock.circuits.topology import PartRole

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


class DutySchmitt(OpAmpVariant):
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
    #: Against the simulation of the equivalent loop (``timedomain.loop_from``), which switches the
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

    functions = VariantFunctions(
        predict=predict_point,
        oscillator=DutyOscillator.of,
        check=check,
        time_domain=loop_from,
        spread=spread_box,
        drive_imbalance=drive_imbalance,
        netlist=netlist,
    )
    sets_duty = True

    def search_form(self) -> SearchForm:
        """The exact search's form (``searchform.SEARCH_FORM``): stages U1 × signal diode,
        rows with two integrator elements R3A and R3B (``search.branches``)."""
        return SEARCH_FORM


DUTY_SCHMITT = DutySchmitt()
