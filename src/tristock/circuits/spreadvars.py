"""Spread variables: how a topology declares the tolerances of a board (its "spread box").

A spread variable is one normalised deviation z in [-1, 1] and the fields of the topology's
point it moves. What it moves is data, one ``FieldMove`` per field, by one of four laws:

- ``"scale"``: x·(1 + amount·z) (a tolerance, amount = tolerance_pct/100; a spread of a
  typical value, amount its ± fraction);
- ``"add"``: x + amount·z (an offset bounded by ± amount, in the field's unit);
- ``"tempco"``: x·(1 + amount·1e-6·(T - 25 °C)), amount in ppm/°C (resistors, capacitors);
- ``"tempco_abs"``: x + amount·(T - 25 °C), amount in the field's unit per °C (a zener's or a
  diode's drop in V/°C).

The two temperature laws take T = mid + half·z from the variable's ``temperature`` (mid,
half): temperature is one variable that moves every value at once, so parts that share a
tempco track each other. ``rail`` marks a supply rail (the worst case looks for balanced
drives along it); ``temperature`` variables are sampled uniformly by the Monte Carlo.
``describe`` turns a deviation into the words a report prints at an extreme.

A topology's ``spread(design, spec)`` returns a ``SpreadBox``: the point at the box's centre
(z = 0 everywhere) and its variables. ``tristock.analysis`` searches, samples and
differentiates that box through the topology's ``predict`` and nothing else. The builders
``tolerance``, ``scaled``, ``added`` and ``temperature`` make one variable; ``part_tolerances``,
``part_tempcos`` and ``rail_tolerances`` read a board's parts and the spec's supply for them.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

from tristock.circuits.rails import Rails
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, Pot, Resistor
from tristock.stock.units import format_value

FloatArray = npt.NDArray[np.float64]
#: A point's fields by name while spread variables are applied.
PointValues = dict[str, Any]
Law = Literal["scale", "add", "tempco", "tempco_abs"]
LAWS: tuple[Law, ...] = ("scale", "add", "tempco", "tempco_abs")


@dataclass(frozen=True)
class FieldMove:
    """One field of the point and how the variable's deviation moves it (module docstring)."""

    field: str
    law: Law
    amount: float

    def __post_init__(self) -> None:
        if self.law not in LAWS:
            raise ValueError(f"law: {self.law!r} is not one of {LAWS}")


@dataclass(frozen=True)
class SpreadVariable:
    """One spread variable: its name (a designator, "V+", "T", "U1.delay", ...), the fields
    it moves, its words at a deviation, and its kind."""

    name: str
    moves: tuple[FieldMove, ...]
    describe: Callable[[float], str]
    #: (mid, half) in °C for the temperature laws: T = mid + half·z.
    temperature: tuple[float, float] | None = None
    rail: bool = False

    def __post_init__(self) -> None:
        thermal = [m.field for m in self.moves if m.law in ("tempco", "tempco_abs")]
        if thermal and self.temperature is None:
            raise ValueError(f"{self.name}: a tempco move needs the temperature (mid, half)")

    @property
    def fields(self) -> tuple[str, ...]:
        """The fields this variable moves, in order."""
        return tuple(m.field for m in self.moves)

    def apply(self, values: PointValues, z: FloatArray) -> None:
        """Move ``values`` (the point's fields by name) in place to the deviation ``z``."""
        _move(values, self.moves, [m.amount for m in self.moves], self.temperature, z)


def apply_joint(
    variables: Sequence[SpreadVariable],
    values: PointValues,
    z: FloatArray,
    member: npt.NDArray[np.intp],
) -> None:
    """Move ``values`` (fields with one entry per row) in place as ``variables[member[r]]``
    moves row r to ``z[r]``: one variable of several boards, the same fields and laws, each
    with its own amounts and temperature range. The operations are ``apply``'s on the same
    numbers, so every row comes out as ``apply`` gives it, to the bit."""
    first = variables[0]
    laws = [(m.field, m.law) for m in first.moves]
    if any([(m.field, m.law) for m in v.moves] != laws for v in variables):
        raise ValueError(f"{first.name}: the boards' variables move different fields or laws")
    amounts = [np.array([v.moves[k].amount for v in variables])[member] for k in range(len(laws))]
    ranges = [v.temperature for v in variables]
    temperature = None
    if any(r is not None for r in ranges):
        if any(r is None for r in ranges):
            raise ValueError(f"{first.name}: a temperature range on some boards only")
        mid, half = np.array(ranges, dtype=float).T
        temperature = (mid[member], half[member])
    _move(values, first.moves, amounts, temperature, z)


def _move(
    values: PointValues,
    moves: Sequence[FieldMove],
    amounts: Sequence[float | FloatArray],
    temperature: tuple[float | FloatArray, float | FloatArray] | None,
    z: FloatArray,
) -> None:
    """Each move's law (module docstring) with its amount; T = mid + half·z."""
    if temperature is not None:  # T - 25 °C, for the tempco laws
        mid, half = temperature
        delta_t = mid + half * z - 25.0
    for m, amount in zip(moves, amounts, strict=True):
        if m.law == "scale":
            values[m.field] = values[m.field] * (1.0 + amount * z)
        elif m.law == "add":
            values[m.field] = values[m.field] + amount * z
        elif m.law == "tempco":
            values[m.field] = values[m.field] * (1.0 + amount * 1e-6 * delta_t)
        else:
            values[m.field] = values[m.field] + amount * delta_t


@dataclass(frozen=True)
class SpreadBox:
    """The centre of a board's spread (every z = 0) as the topology's point, and its
    variables in report order."""

    centre: Any
    variables: tuple[SpreadVariable, ...]


def percent(x: float) -> str:
    """A signed fraction in percent, three figures: 0.01 -> "+1 %"."""
    return f"{x * 100:+.3g} %"


def percent_of(spread: float) -> Callable[[float], str]:
    """The words of a ± ``spread`` fraction at a deviation z: ``percent(spread·z)``."""
    return lambda z: percent(spread * z)


def signed_value(value: float, unit: str) -> str:
    """``format_value`` with an explicit + on positive values."""
    text = format_value(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


def tolerance(
    name: str, field: str, value: float, tol: float, unit: str, *, rail: bool = False
) -> SpreadVariable:
    """A part value (or a rail) ``value``·(1 + tol·z) at ``field``, described as the value
    and its deviation ("21.48 kΩ (-0.1 %)")."""
    return SpreadVariable(
        name,
        (FieldMove(field, "scale", tol),),
        lambda z: f"{format_value(value * (1 + tol * z), unit)} ({percent(tol * z)})",
        rail=rail,
    )


def scaled(
    name: str, fields: tuple[str, ...], spread: float, describe: Callable[[float], str]
) -> SpreadVariable:
    """Every one of ``fields`` x·(1 + spread·z) together."""
    return SpreadVariable(name, tuple(FieldMove(f, "scale", spread) for f in fields), describe)


def added(
    name: str, fields: tuple[str, ...], bound: float, describe: Callable[[float], str]
) -> SpreadVariable:
    """Every one of ``fields`` x + bound·z together."""
    return SpreadVariable(name, tuple(FieldMove(f, "add", bound) for f in fields), describe)


def temperature(
    t_min: float,
    t_max: float,
    tempcos: Mapping[str, float],
    drifts: Mapping[str, float] | None = None,
) -> SpreadVariable:
    """ "T" from ``t_min`` (z = -1) to ``t_max`` (z = +1) °C: each field of ``tempcos``
    moved by its tempco (ppm/°C), each field of ``drifts`` by its drift (unit/°C)."""
    mid, half = (t_min + t_max) / 2.0, (t_max - t_min) / 2.0
    moves = [FieldMove(f, "tempco", tc) for f, tc in tempcos.items()]
    moves += [FieldMove(f, "tempco_abs", d) for f, d in (drifts or {}).items()]
    return SpreadVariable(
        "T", tuple(moves), lambda z: f"{mid + half * z:.4g} °C", temperature=(mid, half)
    )


#: A part whose value a tolerance and a tempco move: designator -> (point field, part).
ValuedParts = Mapping[str, tuple[str, Resistor | Capacitor | Pot]]


def part_tolerances(parts: ValuedParts) -> list[SpreadVariable]:
    """Each part's tolerance (``tolerance``, named by its designator, tol = tolerance_pct/100;
    left out at 0), then each class II capacitor's band as ``<designator>.temp``:
    value·(1 + band·z), band = temp_band_pct/100 (the catalog gives the band, not the curve,
    so any value in it is taken as possible at any temperature: conservative)."""
    variables: list[SpreadVariable] = []
    for name, (field, part) in parts.items():
        value = part.value_f if isinstance(part, Capacitor) else part.value_ohm
        unit = "F" if isinstance(part, Capacitor) else "Ω"
        if part.tolerance_pct > 0:
            variables.append(tolerance(name, field, value, part.tolerance_pct / 100, unit))
    for name, (field, part) in parts.items():
        band_pct = part.temp_band_pct if isinstance(part, Capacitor) else None
        if isinstance(part, Capacitor) and part.is_class_ii and band_pct is not None:
            band = band_pct / 100
            if band > 0:
                variables.append(scaled(f"{name}.temp", (field,), band, percent_of(band)))
    return variables


def part_tempcos(parts: ValuedParts) -> dict[str, float]:
    """Point field -> the part's tempco (ppm/°C) for ``temperature``; 0 where the catalog
    gives none (a class II capacitor: its band is ``<designator>.temp``)."""
    return {
        field: part.tempco_ppm if part.tempco_ppm is not None else 0.0
        for field, part in parts.values()
    }


def rail_tolerances(spec: Spec, rails: Rails) -> list[SpreadVariable]:
    """``V+`` and ``V-``: each rail·(1 + tol·z), tol = supply.tolerance_pct/100, marked
    ``rail``; a 0 V rail (a single supply's V-) and a 0 % tolerance have none."""
    tol_v = spec.supply.tolerance_pct / 100
    if not tol_v > 0:
        return []
    return [
        tolerance(name, field, v, tol_v, "V", rail=True)
        for name, field, v in (("V+", "v_pos", rails.v_pos), ("V-", "v_neg", rails.v_neg))
        if v != 0
    ]


__all__ = [
    "LAWS",
    "FieldMove",
    "Law",
    "PointValues",
    "SpreadBox",
    "SpreadVariable",
    "ValuedParts",
    "added",
    "part_tempcos",
    "part_tolerances",
    "percent",
    "percent_of",
    "rail_tolerances",
    "scaled",
    "signed_value",
    "temperature",
    "tolerance",
]
