"""A design: one chosen part per designator, and how it becomes an oscillator.

Designators (DESIGN.md): R1 threshold resistor (triangle node to the comparator's + input),
R2 threshold feedback resistor (square node to the + input), R3 integrator input resistor,
C1 integrator capacitor, U1 the op amp (one dual, or a single-channel part used twice).
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from dataclasses import dataclass
from typing import Literal

from tristock.circuits.oscillator import OpAmpModel, Oscillator, Rails, timing_network
from tristock.spec.model import SupplySpec
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor

DESIGNATORS = ("U1", "R1", "R2", "R3", "C1")
Control = Literal["series", "divider"]


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
    """The parts of one board: U1, R1, R2, R3, C1, and for trimmed or tuned boards RV1 (with
    its wiper position), R4 (the divider's end stop) and the range capacitors C2..Cn.

    ``selected`` picks the range in use: 0 for C1, 1 for C2, ... . ``wiper`` is the pot's
    position in [0, 1]; see ``circuit.timing_network`` for what it means under each control.
    """

    u1: OpAmp
    r1: Resistor
    r2: Resistor
    r3: Resistor
    c1: Capacitor
    rv1: Pot | None = None
    wiper: float = 0.0
    control: Control = "series"
    r4: Resistor | None = None
    range_caps: tuple[Capacitor, ...] = ()
    selected: int = 0

    def __post_init__(self) -> None:
        if not 0.0 <= self.wiper <= 1.0:
            raise ValueError(f"wiper: must lie in [0, 1], got {self.wiper}")
        if not 0 <= self.selected <= len(self.range_caps):
            raise ValueError(f"range: C{self.selected + 1} is not on this design")
        if self.control == "divider" and (self.rv1 is None or self.r4 is None):
            raise ValueError("parts: a divider control needs RV1 and the end-stop resistor R4")

    @property
    def capacitors(self) -> tuple[Capacitor, ...]:
        """C1, C2, ..., Cn."""
        return (self.c1, *self.range_caps)

    @property
    def timing_capacitor(self) -> Capacitor:
        return self.capacitors[self.selected]

    def parts(self) -> dict[str, Part]:
        """Designator -> part, in BOM order."""
        out: dict[str, Part] = {"U1": self.u1, "R1": self.r1, "R2": self.r2, "R3": self.r3}
        if self.r4 is not None:
            out["R4"] = self.r4
        if self.rv1 is not None:
            out["RV1"] = self.rv1
        for n, cap in enumerate(self.capacitors, start=1):
            out[f"C{n}"] = cap
        return out

    def uses(self) -> Counter[str]:
        """Pieces of each stock code one board takes (a single op amp counts twice)."""
        n: Counter[str] = Counter()
        for name, part in self.parts().items():
            n[part.id] += self.u1.packages_per_board if name == "U1" else 1
        return n

    @property
    def cost_per_board(self) -> float:
        """Σ unit_cost x pieces per board, the catalog's currency."""
        return sum(
            p.cost_per_board if isinstance(p, OpAmp) else p.unit_cost for p in self.parts().values()
        )

    @property
    def bom_lines(self) -> int:
        """Distinct stock codes on the BOM."""
        return len(self.uses())

    def oscillator(self, rails: Rails, temp_c: float = 25.0) -> Oscillator:
        """The oscillator at temperature ``temp_c`` (°C): each value moved by its tempco.

        A class II capacitor has no linear tempco; its nominal value is used here and its
        temperature band is handled by the worst-case analysis.
        """
        cap = self.timing_capacitor
        c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
        r3 = value_at(self.r3.value_ohm, self.r3.tempco_ppm, temp_c)
        c1 = value_at(cap.value_f, c_tc, temp_c)
        opamp = OpAmpModel.from_part(self.u1)
        if self.rv1 is not None:
            rv = value_at(self.rv1.value_ohm, self.rv1.tempco_ppm, temp_c)
            r4 = value_at(self.r4.value_ohm, self.r4.tempco_ppm, temp_c) if self.r4 else 0.0
            r_eff, beta = timing_network(r3, rv, self.wiper, self.control, r4)
            r3, c1 = float(r_eff), c1 / float(beta)
            # The integrator's error voltage works against β·V, so in the equivalent (V, C1/β)
            # it is Ve/β: scale the integrator's offset and bias current by 1/β.
            opamp = dataclasses.replace(
                opamp, offset_v=opamp.offset_v / float(beta), bias_a=opamp.bias_a / float(beta)
            )
        return Oscillator(
            r1=value_at(self.r1.value_ohm, self.r1.tempco_ppm, temp_c),
            r2=value_at(self.r2.value_ohm, self.r2.tempco_ppm, temp_c),
            r3=r3,
            c1=c1,
            opamp=opamp,
            rails=rails,
        )
