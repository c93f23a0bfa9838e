"""A design: one chosen part per designator, and how it becomes an oscillator.

Designators (DESIGN.md): R1 threshold resistor (triangle node to the comparator's + input),
R2 threshold feedback resistor (square node to the + input), R3 integrator input resistor,
C1 integrator capacitor, U1 the op amp (one dual, or a single-channel part used twice).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import Rails
from tristock.circuits.rails import rails_from_supply as rails_from_supply  # re-exported
from tristock.circuits.topology import Topology
from tristock.spec.loading import SpecError
from tristock.stock.catalog import Catalog
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor

DESIGNATORS = ("U1", "R1", "R2", "R3", "C1")
Control = Literal["series", "divider"]


@dataclass(frozen=True)
class Design:
    """The parts of one board: U1, R1, R2, R3, C1, and for trimmed or tuned boards RV1 (with
    its wiper position), R4 (the divider's end stop) and the range capacitors C2..Cn.

    ``selected`` picks the range in use: 0 for C1, 1 for C2, ... . ``wiper`` is the pot's
    position in [0, 1]; see ``timing.timing_network`` for what it means under each control.
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
    topology: Topology = OPAMP_SCHMITT
    # comparator-IC boards (``comparator_schmitt``): U2, and R5 for an open-drain U2
    u2: Comparator | None = None
    r5: Resistor | None = None

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
        out: dict[str, Part] = {"U1": self.u1}
        if self.u2 is not None:
            out["U2"] = self.u2
        out.update({"R1": self.r1, "R2": self.r2, "R3": self.r3})
        if self.r5 is not None:
            out["R5"] = self.r5
        if self.r4 is not None:
            out["R4"] = self.r4
        if self.rv1 is not None:
            out["RV1"] = self.rv1
        for n, cap in enumerate(self.capacitors, start=1):
            out[f"C{n}"] = cap
        return out

    @property
    def u1_packages(self) -> int:
        """U1's packages per board: one channel with a comparator IC (U2), else two."""
        return 1 if self.u2 is not None else self.u1.packages_per_board

    def uses(self) -> Counter[str]:
        """Pieces of each stock code one board takes (a single op amp counts twice, unless
        U2 does the comparing)."""
        n: Counter[str] = Counter()
        for name, part in self.parts().items():
            n[part.id] += self.u1_packages if name == "U1" else 1
        return n

    @property
    def cost_per_board(self) -> float:
        """Σ unit_cost x pieces per board, the catalog's currency."""
        return sum(
            p.unit_cost * self.u1_packages if isinstance(p, OpAmp) else p.unit_cost
            for p in self.parts().values()
        )

    @property
    def bom_lines(self) -> int:
        """Distinct stock codes on the BOM."""
        return len(self.uses())

    def oscillator(self, rails: Rails, temp_c: float = 25.0) -> Oscillator:
        """The oscillator at temperature ``temp_c`` (°C), built by the board's topology."""
        built: Oscillator = self.topology.oscillator(self, rails, temp_c)
        return built


_RANGE_CAPS = tuple(f"C{n}" for n in range(2, 9))
OPTIONAL = ("R4", "RV1", *_RANGE_CAPS, "U2", "R5")
_KINDS: dict[str, type] = {
    "U1": OpAmp,
    "U2": Comparator,
    "R5": Resistor,
    "R1": Resistor,
    "R2": Resistor,
    "R3": Resistor,
    "C1": Capacitor,
    "R4": Resistor,
    "RV1": Pot,
    **{c: Capacitor for c in _RANGE_CAPS},
}


def part_ids(parts: Any) -> dict[str, str]:
    """Designator -> stock code from a ``parts`` mapping; errors name the field."""
    if not isinstance(parts, dict):
        raise SpecError(["parts: expected a table of designator = stock code"])
    errors: list[str] = []
    out: dict[str, str] = {}
    for name in (*DESIGNATORS, *OPTIONAL):
        item = parts.get(name)
        if item is None and name in OPTIONAL:
            continue
        if isinstance(item, dict):
            item = item.get("id")
        if not isinstance(item, str) or not item:
            errors.append(f"parts.{name}: missing (a stock code, or an object with an id)")
        else:
            out[name] = item
    errors += [f"parts.{k}: unknown designator" for k in parts if k not in _KINDS]
    caps = [c for c in _RANGE_CAPS if c in out]
    if caps and caps != list(_RANGE_CAPS[: len(caps)]):
        errors.append("parts: range capacitors must be numbered C2, C3, ... without gaps")
    if errors:
        raise SpecError(errors)
    return out


def resolve(
    ids: dict[str, str],
    catalog: Catalog,
    *,
    wiper: float = 0.0,
    control: str = "series",
    selected: int = 0,
) -> Design:
    """The Design for these stock codes; unknown or wrong-kind ids raise SpecError."""
    errors: list[str] = []
    found: dict[str, Any] = {}
    for name, pid in ids.items():
        try:
            part = catalog.get(pid)
        except KeyError:
            errors.append(f"parts.{name}: {pid!r} is not in the catalog {catalog.path}")
            continue
        if not isinstance(part, _KINDS[name]):
            errors.append(
                f"parts.{name}: {pid!r} is a {type(part).__name__}, not a {_KINDS[name].__name__}"
            )
            continue
        found[name.lower()] = part
    if errors:
        raise SpecError(errors)
    range_caps = tuple(found.pop(c.lower()) for c in _RANGE_CAPS if c.lower() in found)
    if "u2" in found:
        from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT  # a U2: that loop's

        found["topology"] = COMPARATOR_SCHMITT
    try:
        return Design(
            **found,
            range_caps=range_caps,
            wiper=wiper,
            control=control,  # type: ignore[arg-type]
            selected=selected,
        )
    except ValueError as err:
        raise SpecError([str(err)]) from None


# --------------------------------------------------------------------------------------------
# Boards of any topology (the variants' designators: R5, D1..D4, R3A, R3B, ...)

#: The part type of each catalog table a topology's roles name.
PART_TYPES: dict[str, type] = {
    "opamps": OpAmp,
    "resistors": Resistor,
    "capacitors": Capacitor,
    "pots": Pot,
    "comparators": Comparator,
    "diodes": Diode,
}


@dataclass(frozen=True)
class Board:
    """The parts of one board of ``topology``: designator -> part (``BoardParts``); no pot,
    so ``wiper`` 0, ``control`` "series" and ``selected`` 0 (C1)."""

    topology: Topology
    by_designator: tuple[tuple[str, Part], ...]
    wiper: float = 0.0
    control: str = "series"
    selected: int = 0

    def parts(self) -> dict[str, Part]:
        """Designator -> part, in the topology's BOM order."""
        found = dict(self.by_designator)
        return {d: found[d] for d in self.topology.designators if d in found}

    def oscillator(self, rails: Rails, temp_c: float = 25.0) -> Any:
        """The oscillator at ``temp_c`` (°C), built by the board's topology."""
        return self.topology.oscillator(self, rails, temp_c)

    def uses(self) -> Counter[str]:
        """Pieces of each stock code one board takes: an op amp U1 does both the integrating
        and the comparing (a single-channel part counts twice), every other part once."""
        n: Counter[str] = Counter()
        for part in self.parts().values():
            n[part.id] += part.packages_per_board if isinstance(part, OpAmp) else 1
        return n

    @property
    def cost_per_board(self) -> float:
        """Σ unit_cost x pieces per board, the catalog's currency."""
        return sum(
            p.unit_cost * p.packages_per_board if isinstance(p, OpAmp) else p.unit_cost
            for p in self.parts().values()
        )

    @property
    def bom_lines(self) -> int:
        """Distinct stock codes on the BOM."""
        return len(self.uses())


#: A board of any topology: the op-amp Schmitt loop's (and the comparator loop's) named
#: fields, or the generic designator table of the other variants.
AnyBoard = Design | Board


def board_from(topology: Topology, parts: Mapping[str, Part]) -> AnyBoard:
    """The board of ``topology`` with ``parts`` (designator -> part): a ``Design`` for the
    op-amp Schmitt and comparator loops, else a ``Board`` in the topology's BOM order."""
    if topology is OPAMP_SCHMITT or topology.name == "comparator_schmitt":
        named: dict[str, Any] = {d.lower(): p for d, p in parts.items()}
        return Design(**named, topology=topology)
    return Board(topology, tuple((d, parts[d]) for d in topology.designators if d in parts))


def resolve_board(topology: Topology, ids: dict[str, str], catalog: Catalog) -> Board:
    """The Board of ``topology`` for these stock codes; unknown designators, missing required
    ones and unknown or wrong-kind ids raise SpecError naming each."""
    errors: list[str] = []
    found: list[tuple[str, Part]] = []
    known = set(topology.designators)
    errors += [f"parts.{d}: unknown designator for {topology.name}" for d in ids if d not in known]
    errors += [f"parts.{d}: missing (a stock code)" for d in topology.required if d not in ids]
    for name, pid in ids.items():
        if name not in known:
            continue
        kind = PART_TYPES[topology.table_of(name)]
        try:
            part = catalog.get(pid)
        except KeyError:
            errors.append(f"parts.{name}: {pid!r} is not in the catalog {catalog.path}")
            continue
        if not isinstance(part, kind):
            errors.append(
                f"parts.{name}: {pid!r} is a {type(part).__name__}, not a {kind.__name__}"
            )
            continue
        found.append((name, part))
    if errors:
        raise SpecError(errors)
    return Board(topology, tuple(found))
