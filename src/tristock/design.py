"""A design: one chosen part per designator, and how it becomes an oscillator.

Designators (DESIGN.md): R1 threshold resistor (triangle node to the comparator's + input),
R2 threshold feedback resistor (square node to the + input), R3 integrator input resistor,
C1 integrator capacitor, U1 the op amp (one dual, or a single-channel part used twice).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

from tristock.circuit import OpAmpModel, Oscillator, Rails
from tristock.parts import Capacitor, OpAmp, Part, Resistor
from tristock.spec import SupplySpec

DESIGNATORS = ("U1", "R1", "R2", "R3", "C1")


def rails_from_supply(supply: SupplySpec, scale: float = 1.0) -> Rails:
    """Rails scaled by ``scale`` (1 ± tolerance for rail corners).

    A single-supply reference given in the spec stays where it is set (a regulated
    reference); a default mid-rail reference follows the rail.
    """
    v_ref = supply.reference_v if supply.negative_v == 0 else None
    return Rails(supply.positive_v * scale, supply.negative_v * scale, v_ref)


def value_at(value: float, tempco_ppm: float, temp_c: float) -> float:
    """value(T) = value(25 °C)·(1 + tc·(T - 25 °C)), tc in ppm/°C."""
    return value * (1.0 + tempco_ppm * 1e-6 * (temp_c - 25.0))


@dataclass(frozen=True)
class Design:
    """The parts of one board: U1, R1, R2, R3, C1."""

    u1: OpAmp
    r1: Resistor
    r2: Resistor
    r3: Resistor
    c1: Capacitor

    def parts(self) -> dict[str, Part]:
        """Designator -> part, in BOM order."""
        return {"U1": self.u1, "R1": self.r1, "R2": self.r2, "R3": self.r3, "C1": self.c1}

    def uses(self) -> Counter[str]:
        """Pieces of each stock code one board takes (a single op amp counts twice)."""
        n: Counter[str] = Counter()
        n[self.u1.id] += self.u1.packages_per_board
        for part in (self.r1, self.r2, self.r3, self.c1):
            n[part.id] += 1
        return n

    @property
    def cost_per_board(self) -> float:
        """Σ unit_cost x pieces per board, the catalog's currency."""
        passives = (self.r1, self.r2, self.r3, self.c1)
        return self.u1.cost_per_board + sum(p.unit_cost for p in passives)

    @property
    def bom_lines(self) -> int:
        """Distinct stock codes on the BOM."""
        return len(self.uses())

    def oscillator(self, rails: Rails, temp_c: float = 25.0) -> Oscillator:
        """The oscillator at temperature ``temp_c`` (°C): each value moved by its tempco.

        A class II capacitor has no linear tempco; its nominal value is used here and its
        temperature band is handled by the worst-case analysis.
        """
        c_tc = self.c1.tempco_ppm if self.c1.tempco_ppm is not None else 0.0
        return Oscillator(
            r1=value_at(self.r1.value_ohm, self.r1.tempco_ppm, temp_c),
            r2=value_at(self.r2.value_ohm, self.r2.tempco_ppm, temp_c),
            r3=value_at(self.r3.value_ohm, self.r3.tempco_ppm, temp_c),
            c1=value_at(self.c1.value_f, c_tc, temp_c),
            opamp=OpAmpModel.from_part(self.u1),
            rails=rails,
        )
