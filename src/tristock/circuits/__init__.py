"""The physics: topologies and their building blocks.

Building blocks: ``rails`` (rails, the op amp's terms and output levels), ``transition`` (the
comparator's switching edge), ``integrator`` (the single-pole integrator), ``looptiming`` (the
loop's period, duty and overshoot from its drives), ``timing`` (pot wirings), ``checks`` (the
finding type and checks every topology shares), ``board`` (a board: its topology and one part
per designator), ``diode`` (junctions and zener pairs), ``spicelines`` (netlist pieces the
variants share). The interface: ``topology``. Each topology is one package beside them
(``opamp_schmitt``, ``comparator_schmitt``, ``clamped_schmitt``, ``duty_schmitt``),
registered here in ``TOPOLOGIES``: the contract tests run over this mapping.
"""

from __future__ import annotations

from tristock.circuits.clamped_schmitt import CLAMPED_SCHMITT
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT
from tristock.circuits.duty_schmitt import DUTY_SCHMITT
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.topology import Topology
from tristock.spec.model import Spec

#: Every topology by name.
TOPOLOGIES: dict[str, Topology] = {
    t.name: t for t in (OPAMP_SCHMITT, COMPARATOR_SCHMITT, CLAMPED_SCHMITT, DUTY_SCHMITT)
}
#: The topology of a board or spec that names none: today's circuit.
DEFAULT_TOPOLOGY: Topology = OPAMP_SCHMITT


def spec_topologies(spec: Spec) -> list[Topology]:
    """The topologies the spec's ``[circuit]`` asks for: the one it names, or with
    ``topology = "any"`` every searchable one (``Topology.search_form`` not None)."""
    name = spec.circuit.topology_name
    if name == "any":
        return [t for t in TOPOLOGIES.values() if t.search_form() is not None]
    return [TOPOLOGIES[name]]


__all__ = ["DEFAULT_TOPOLOGY", "TOPOLOGIES", "spec_topologies"]
