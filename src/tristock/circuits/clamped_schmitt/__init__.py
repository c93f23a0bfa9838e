"""The zener-clamped loop: the op-amp Schmitt loop with its square taken behind a series
resistor R5 from U1B's output and clamped by back-to-back zeners D1/D2 to the reference, so
the square's levels, and the triangle's amplitude, are ±(Vz + Vf) plus the zeners' rise with
current, not the rails.

Its modules: ``physics`` (the vectorised model), ``oscillator`` (the built circuit: a board
at a temperature, its point), ``timedomain`` (its equivalent loop for the simulation),
``checks``, ``netlist`` (ngspice), ``spread`` (the spread box on a spec) and the exact
search's form (``searchform``, on ``clamplevels`` and ``stageoptions``). ``CLAMPED_SCHMITT``
is the topology object, an ``opampvariant.OpAmpVariant`` delegating to these modules.
"""

from __future__ import annotations

from types import MappingProxyType

from tristock.circuits.clamped_schmitt.checks import check
from tristock.circuits.clamped_schmitt.netlist import netlist
from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import predict_point
from tristock.circuits.clamped_schmitt.searchform import ClampedSchmittForm
from tristock.circuits.clamped_schmitt.spread import (
    SENSITIVITY_FIELDS,
    drive_imbalance,
    spread_box,
)
from tristock.circuits.clamped_schmitt.timedomain import loop_from
from tristock.circuits.opampvariant import OpAmpVariant, VariantFunctions
from tristock.circuits.searchform import SearchForm
from tristock.circuits.topology import PartRole

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


class ClampedSchmitt(OpAmpVariant):
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
    #: Against the simulation of the equivalent loop (``timedomain.loop_from``): frequency and
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
            "R5": "R1F-1K50",
            "C1": "CPPG-4N70",
            "D1": "GD-Z5V1-02",
            "D2": "GD-Z5V1-02",
        }
    )
    demo_rails = (12.0, -12.0)
    sensitivity_fields = SENSITIVITY_FIELDS

    functions = VariantFunctions(
        predict=predict_point,
        oscillator=ClampedOscillator.of,
        check=check,
        time_domain=loop_from,
        spread=spread_box,
        drive_imbalance=drive_imbalance,
        netlist=netlist,
    )
    diode_keyword = "zeners"

    def search_form(self) -> SearchForm:
        """The exact search's form (``searchform.SEARCH_FORM``): stages U1 × zener × R5 at the
        clamp's design point (``designpoint``), its timing bounded through a delay interval
        (``clamplevels``, "Timing")."""
        return SEARCH_FORM


CLAMPED_SCHMITT = ClampedSchmitt()
SEARCH_FORM = ClampedSchmittForm(CLAMPED_SCHMITT)
