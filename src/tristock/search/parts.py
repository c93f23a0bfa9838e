"""Eligible part tables: the resistors and capacitors a spec allows, as sorted arrays.

Both the fixed-design search (``search.model.build_model``) and the tuned search
(``designs.tuned.model``) draw their resistor and capacitor tables from here (and their op
amps through ``circuits.opamp_schmitt.searchform.stocked_opamps``), so the eligibility rules
and their exclusion reasons are stated once.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import Exclusion
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.eseries import is_member
from tristock.stock.parts import Capacitor, Resistor


@dataclass
class PartTable:
    """Eligible parts of one kind as arrays, sorted by value."""

    parts: list[Any]  # Resistor or Capacitor rows, sorted by value
    value: NDArray[np.float64]  # Ω or F
    ln_value: NDArray[np.float64]
    tol: NDArray[np.float64]  # fraction
    tempco: NDArray[np.float64]  # ppm/°C
    extra_band: NDArray[np.float64]  # class II temperature band, fraction
    cost: NDArray[np.float64]
    stock: NDArray[np.int64]
    voltage: NDArray[np.float64]  # capacitors: rated DC voltage; resistors: inf

    @classmethod
    def of(cls, parts: Sequence[Resistor] | Sequence[Capacitor]) -> PartTable:
        items: list[Any] = sorted(parts, key=lambda p: (p.value, p.id))
        tempco = [p.tempco_ppm if p.tempco_ppm is not None else 0.0 for p in items]
        band = [
            (p.temp_band_pct or 0.0) / 100 if isinstance(p, Capacitor) and p.is_class_ii else 0.0
            for p in items
        ]
        value = np.array([p.value for p in items], dtype=np.float64)
        return cls(
            parts=items,
            value=value,
            ln_value=np.log(value),
            tol=np.array([p.tolerance_pct / 100 for p in items], dtype=np.float64),
            tempco=np.array(tempco, dtype=np.float64),
            extra_band=np.array(band, dtype=np.float64),
            cost=np.array([p.unit_cost for p in items], dtype=np.float64),
            stock=np.array([p.stock for p in items], dtype=np.int64),
            voltage=np.array([getattr(p, "voltage_v", math.inf) for p in items], dtype=np.float64),
        )

    def __len__(self) -> int:
        return len(self.parts)


def in_series(r: Resistor, names: Sequence[str]) -> bool:
    """A resistor is "in" a series when its drawer says so or its value is a member: an E96
    drawer's 10 kΩ is an E24 value too."""
    return r.series in names or any(is_member(s, r.value_ohm) for s in names)


def eligible_resistors(spec: Spec, catalog: Catalog) -> tuple[PartTable, list[Exclusion]]:
    """The resistors in the spec's value range and series with stock for every board; the
    ones short of stock as exclusions (designator "R")."""
    lim = spec.limits
    boards = spec.build.boards
    excl: list[Exclusion] = []
    resistors: list[Resistor] = []
    for r in catalog.resistors:
        if not lim.resistance_min_ohm <= r.value_ohm <= lim.resistance_max_ohm:
            continue
        if lim.resistor_series is not None and not in_series(r, lim.resistor_series):
            continue
        if r.stock < boards:
            excl.append(Exclusion("R", r.id, f"stock {r.stock} < {boards} boards"))
            continue
        resistors.append(r)
    return PartTable.of(resistors), excl


def eligible_capacitors(
    spec: Spec, catalog: Catalog, designator: str
) -> tuple[PartTable, list[Exclusion]]:
    """The non-polarised capacitors of the spec's dielectrics with stock for every board and
    a rating that can hold the triangle: its largest |peak| is at least half the smallest
    amplitude in the band, so a rating below that (with the amplitude margin) can never do.
    The others (stock, rating) as exclusions under ``designator``."""
    lim = spec.limits
    boards = spec.build.boards
    a_lo = spec.triangle.amplitude_vpp * (1 - spec.triangle.tolerance_pct / 100)
    peak_floor = a_lo / 2 * (1 + spec.triangle.tolerance_pct / 100)
    excl: list[Exclusion] = []
    capacitors: list[Capacitor] = []
    for cap in catalog.capacitors:
        if cap.dielectric not in lim.dielectrics or cap.is_polarised:
            continue
        if cap.stock < boards:
            excl.append(Exclusion(designator, cap.id, f"stock {cap.stock} < {boards} boards"))
            continue
        if cap.voltage_v < peak_floor:
            reason = f"rated {cap.voltage_v:g} V < peak {peak_floor:.2f} V"
            excl.append(Exclusion(designator, cap.id, reason))
            continue
        capacitors.append(cap)
    return PartTable.of(capacitors), excl
