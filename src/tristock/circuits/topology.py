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
- ``time_domain(oscillator)``: the loop's parameters for the event-driven simulation.
- ``netlist(oscillator, periods=...)``: an ngspice netlist of the same circuit.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, NamedTuple, Protocol

import numpy as np
import numpy.typing as npt

from tristock.circuits.checks import Warning
from tristock.circuits.rails import Rails
from tristock.stock.parts import Part

FloatArray = npt.NDArray[np.float64]
#: A float, or an ndarray of floats when ``predict`` was called with arrays.
Value = float | FloatArray
ArrayLike = float | npt.ArrayLike

#: The catalog tables a part role may name (``stock.columns.KINDS``).
TABLES = ("opamps", "resistors", "capacitors", "pots", "diodes")


class Prediction(NamedTuple):
    """What the model predicts; every field a float, or an ndarray when predict broadcast.

    Voltages are relative to the reference node (V); times in s; frequency in Hz.

    - ``duty_high``: fraction of the period the square is above mid-swing (VH - VL)/2.
    - ``amplitude_vpp``: the triangle's true peak-to-peak, overshoot included.
    - ``offset_v``: the triangle's midpoint, (peak_high_v + peak_low_v)/2.
    - ``square_high_v`` = +VH, ``square_low_v`` = -VL (signed levels).
    - ``threshold_high_v``/``threshold_low_v``: where the triangle trips the comparator at
      the top (+VL·k + shift) and the bottom (-VH·k + shift).
    - ``peak_high_v``/``peak_low_v``: the triangle's extremes, thresholds plus overshoot.
    - ``slope_v_per_s``: the steeper ramp, max(a, b)/(R3·C1).
    - ``effective_delay_s``: the one delay d for which T = T0' + (VH + VL)²/(a·b)·d (T0' the
      ideal-switch period with the integrator's slower ramps), i.e. the weighted mean
      (d_rise·b + d_fall·a)/(a + b) of the edges' effective delays (td + τ/2 for a linear
      slew; the finite-GBW build-up and the integrator's lag added).
    - ``timing_share``: the share of the period set by op-amp timing (delay, slew and both
      channels' GBW), 1 - T_ideal/T, with T_ideal the period of the same loop (the same square
      levels, offsets and bias) with instant switching and an ideal integrator.
    """

    frequency_hz: Value
    period_s: Value
    duty_high: Value
    amplitude_vpp: Value
    offset_v: Value
    square_high_v: Value
    square_low_v: Value
    threshold_high_v: Value
    threshold_low_v: Value
    peak_high_v: Value
    peak_low_v: Value
    slope_v_per_s: Value
    effective_delay_s: Value
    timing_share: Value


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


class BoardParts(Protocol):
    """What a topology reads of a board (``circuits.board.Design``): one part per designator
    and the pot's setting (its wiper, how it is wired, the range capacitor in use)."""

    @property
    def wiper(self) -> float: ...

    @property
    def control(self) -> str: ...

    @property
    def selected(self) -> int: ...

    def parts(self) -> dict[str, Part]: ...


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
    def time_domain(self, oscillator: Any) -> Any:
        """The loop's parameters for ``tristock.simulate`` (events, levels, rates)."""

    @abstractmethod
    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        """An ngspice netlist of the same circuit: a transient run past start-up, then
        ``periods`` periods measured (``.meas``: ``per`` (s), ``duty`` (fraction high),
        ``vtmax`` and ``vtmin`` (the triangle's peaks, V to ground))."""

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
