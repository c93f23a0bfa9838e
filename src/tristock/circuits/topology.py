"""The topology interface: what every oscillator circuit declares and implements.

A topology is one circuit: its designators and part roles (which catalog table each part
comes from, how many pieces a board takes), its ASCII sketch naming every designator, and
its physics. Everything else (analysis, both search engines, trim, tuning, re-optimisation,
simulation, reports) is generic over this interface; ``tristock.circuits.TOPOLOGIES`` holds
every topology by name, and the contract tests parametrize over that mapping.

Like a transmission-line medium that declares two quantities and derives its builders from
them, a topology declares little and the base class derives the rest (``designators``,
``table_of``, ``required``, ``describe``).

What a topology implements:

- ``predict(point, v_ref, control)``: the vectorised model (numpy broadcasting over every field
  of ``point``, the topology's own point type from ``board_point``) giving a ``Prediction``:
  frequency, period, duty, amplitude, offset, square levels, thresholds, peaks, slope,
  effective delay and the timing share.
- ``board_point(design, rails, temp_c)``: a board's values at a temperature as that point.
- ``oscillator(design, rails, temp_c)``: the built circuit (``prediction()``, ``str``).
- ``check(design, rails)``: design checks, a list of ``circuits.checks.Warning``.
- ``time_domain(oscillator)``: the loop's parameters for the event-driven simulation
  (``circuits.timeloop.Loop``).
- ``netlist(oscillator, periods=...)``: an ngspice netlist of the same circuit.
- ``spread(design, spec)``: the board's spread box on a spec (``circuits.spreadvars``): the
  point at its centre and the tolerance variables, each naming the point fields it moves and
  by which law; the analysis (worst case, Monte Carlo) works on nothing else.
- ``drive_imbalance(point, v_ref, control)``: the difference of the integrator's two drives
  (V), zero where the ramps are equally steep; affine in each rail variable's deviation, so
  the worst case finds the balanced point along a rail exactly.
- ``sensitivity_fields``: sensitivity name -> the point fields it scales together.

- ``search_form()``: the ``circuits.searchform.SearchForm`` the exact search works through,
  or None (the default): not searchable yet.

The point is a frozen dataclass of floats or broadcastable arrays (``dataclasses.replace``
builds moved points from it).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Protocol

from tristock.circuits.boardparts import BoardParts
from tristock.circuits.checks import Warning
from tristock.circuits.prediction import ArrayLike, FloatArray, Prediction, Value
from tristock.circuits.rails import Rails
from tristock.circuits.searchform import SearchForm
from tristock.circuits.spreadvars import SpreadBox
from tristock.circuits.timeloop import Loop
from tristock.spec.model import Spec

__all__ = [
    "TABLES",
    "ArrayLike",
    "BoardParts",
    "FloatArray",
    "PartRole",
    "Prediction",
    "Topology",
    "Value",
]

#: The catalog tables a part role may name (``stock.columns.KINDS``).
TABLES = ("opamps", "resistors", "capacitors", "pots", "comparators", "diodes")


@dataclass(frozen=True)
class PartRole:
    """One designator of a topology: the table its part comes from, what it does, and the
    pieces of that part a board takes (an op amp: 1 for a dual; a single-channel part's
    ``packages_per_board`` counts twice). ``optional`` parts appear only on trimmed or tuned
    boards (RV1, R4, C2..Cn)."""

    designator: str
    table: str
    role: str
    optional: bool = False

    def __post_init__(self) -> None:
        if self.table not in TABLES:
            raise ValueError(f"table: {self.table!r} is not a catalog table {TABLES}")


class BuiltCircuit(Protocol):
    """A built circuit (``Topology.oscillator``): it predicts itself."""

    def prediction(self) -> Prediction: ...


class Topology(ABC):
    """One oscillator circuit (see the module docstring for the contract)."""

    #: The topology's name, its key in ``TOPOLOGIES``.
    name: str
    #: Every designator's role, in BOM order.
    roles: tuple[PartRole, ...]
    #: An ASCII drawing of the circuit naming every designator.
    sketch: str
    #: The relative accuracy the model claims against the time-domain simulation of the same
    #: circuit (frequency and amplitude), and in duty (fraction of the period).
    accuracy: float
    duty_accuracy: float
    #: The relative accuracy in frequency and amplitude against ngspice on ``netlist``.
    spice_accuracy: float
    #: A board of the bundled demo stock room (designator -> stock code) and its rails (V+,
    #: V-): the contract tests build and run it.
    demo_board: Mapping[str, str]
    demo_rails: tuple[float, float]
    #: Sensitivity name ("R1", "V+", "U1.slew", ...) -> the point fields it scales together.
    sensitivity_fields: Mapping[str, tuple[str, ...]]

    @abstractmethod
    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        """The vectorised model at ``point`` (from ``board_point``, or one with arrays)."""

    @abstractmethod
    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> Any:
        """The board's values at ``temp_c`` as this topology's point."""

    @abstractmethod
    def oscillator(self, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Any:
        """The built circuit: an object with ``prediction()`` and a readable ``str``."""

    @abstractmethod
    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        """Every design check of the board on ``rails``."""

    @abstractmethod
    def time_domain(self, oscillator: Any) -> Loop:
        """The loop's parameters for ``tristock.simulate`` (events, levels, rates)."""

    #: Whether the circuit sets its duty cycle (searched only for a spec that sets one, and
    #: left out of ``topology = "any"``, whose spec cannot).
    sets_duty: bool = False

    def search_form(self) -> SearchForm | None:
        """What the exact search needs of this circuit (``circuits.searchform``): its stage
        options, divider/integrator/capacitor designators, row levels and row model; None
        means the circuit is not searchable yet (the exact search refuses it, everything
        else works)."""
        return None

    @abstractmethod
    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        """An ngspice netlist of the same circuit: a transient run past start-up, then
        ``periods`` periods measured (``.meas``: ``per`` (s), ``duty`` (fraction high),
        ``vtmax`` and ``vtmin`` (the triangle's peaks, V to ground))."""

    @abstractmethod
    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        """The board's spread box on ``spec``: the point at its centre and its variables
        (tolerances, rails, temperature, active-part spreads; ``circuits.spreadvars``)."""

    @abstractmethod
    def drive_imbalance(self, point: Any, v_ref: float | None, control: str = "series") -> Any:
        """The integrator's drive up minus its drive down (V) at ``point``, vectorised;
        affine in each rail variable's deviation (the worst case's balanced-swing points)."""

    # Derived from the declarations ------------------------------------------------------

    @property
    def designators(self) -> tuple[str, ...]:
        """Every designator, required ones first, in BOM order."""
        return tuple(r.designator for r in self.roles)

    @property
    def required(self) -> tuple[str, ...]:
        """The designators every board has."""
        return tuple(r.designator for r in self.roles if not r.optional)

    def table_of(self, designator: str) -> str:
        """The catalog table ``designator``'s part comes from."""
        for r in self.roles:
            if r.designator == designator:
                return r.table
        raise KeyError(f"{designator}: not a designator of {self.name}")

    def describe(self) -> Mapping[str, str]:
        """Designator -> its role in plain words."""
        return {r.designator: r.role for r in self.roles}

    def __str__(self) -> str:
        return f"{self.name}: {', '.join(self.designators)}"
