"""The physics: topologies and their building blocks.

Building blocks: ``rails`` (rails, the op amp's terms and output levels), ``transition`` (the
comparator's switching edge), ``integrator`` (the single-pole integrator), ``looptiming`` (the
loop's period, duty and overshoot from its drives), ``timing`` (pot wirings), ``checks`` (the
finding type and checks every topology shares), ``board`` (a board: its topology and one part
per designator), ``diode`` (junctions and zener pairs), ``spicelines`` (netlist pieces the
variants share). The interface: ``topology``. Each topology is one package beside them
(``opamp_schmitt``, ``comparator_schmitt``, ``clamped_schmitt``, ``duty_schmitt``),
registered here in ``TOPOLOGIES``: the contract tests run over this mapping. A variant's
package is imported when it is first looked up, so a process that works on one circuit loads
no other (start-up of the command; ``tests/cli/test_cli_imports.py``).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping

from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.topology import Topology
from tristock.spec.model import Spec


def _comparator_schmitt() -> Topology:
    from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT  # on first use

    return COMPARATOR_SCHMITT


def _clamped_schmitt() -> Topology:
    from tristock.circuits.clamped_schmitt import CLAMPED_SCHMITT  # on first use

    return CLAMPED_SCHMITT


def _duty_schmitt() -> Topology:
    from tristock.circuits.duty_schmitt import DUTY_SCHMITT  # on first use

    return DUTY_SCHMITT


class TopologyRegistry(Mapping[str, Topology]):
    """Topologies by name, each given by a function that imports its package on first use
    (keys and order without importing any)."""

    def __init__(self, loaders: dict[str, Callable[[], Topology]]) -> None:
        self._loaders = loaders

    def __getitem__(self, name: str) -> Topology:
        return self._loaders[name]()

    def __iter__(self) -> Iterator[str]:
        return iter(self._loaders)

    def __len__(self) -> int:
        return len(self._loaders)


#: Every topology by name (each key is its topology's ``name``).
TOPOLOGIES: Mapping[str, Topology] = TopologyRegistry(
    {
        OPAMP_SCHMITT.name: lambda: OPAMP_SCHMITT,
        "comparator_schmitt": _comparator_schmitt,
        "clamped_schmitt": _clamped_schmitt,
        "duty_schmitt": _duty_schmitt,
    }
)
#: The topology of a board or spec that names none: today's circuit.
DEFAULT_TOPOLOGY: Topology = OPAMP_SCHMITT


def spec_topologies(spec: Spec) -> list[Topology]:
    """The topologies the spec's ``[circuit]`` asks for: the one it names, or with
    ``topology = "any"`` every searchable one (``Topology.search_form`` not None) but the
    set-duty loop (``Topology.sets_duty``: an "any" spec cannot set a duty)."""
    name = spec.circuit.topology_name
    if name == "any":
        return [t for t in TOPOLOGIES.values() if t.search_form() is not None and not t.sets_duty]
    return [TOPOLOGIES[name]]


__all__ = ["DEFAULT_TOPOLOGY", "TOPOLOGIES", "TopologyRegistry", "spec_topologies"]
