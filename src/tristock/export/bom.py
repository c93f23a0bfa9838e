"""The bill of materials of one design for a build of ``boards`` boards.

One row per stock code (designators sharing a code share the row), in the board's BOM order:

    pieces_for_build = pieces_per_board x boards
    extended_cost    = unit_cost x pieces_for_build         (the catalog's currency)
    stock_after      = max(stock - pieces_for_build, 0)
    shortfall        = max(pieces_for_build - stock, 0)

A single-channel op amp takes two pieces per board (both halves of the loop). The total row
sums the pieces, the extended cost and the shortfall; its ``unit_cost`` is the cost of one
board (Σ unit_cost x pieces_per_board).
"""

from __future__ import annotations

import csv
import io
from dataclasses import asdict, dataclass
from typing import Any

from tristock.circuits.board import AnyBoard
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.stock.units import format_value

#: The CSV header, in column order (the fields of ``BomRow``).
COLUMNS = (
    "stock_code",
    "designators",
    "kind",
    "value",
    "tolerance_pct",
    "dielectric_or_series",
    "package",
    "pieces_per_board",
    "pieces_for_build",
    "unit_cost",
    "extended_cost",
    "stock",
    "stock_after",
    "shortfall",
)


@dataclass(frozen=True)
class BomRow:
    """One stock code of the BOM (or the total row, ``stock_code`` "TOTAL")."""

    stock_code: str
    designators: str
    kind: str
    value: str
    tolerance_pct: float | None
    dielectric_or_series: str
    package: str
    pieces_per_board: int
    pieces_for_build: int
    unit_cost: float | None
    extended_cost: float
    stock: int | None
    stock_after: int | None
    shortfall: int


@dataclass(frozen=True)
class Bom:
    boards: int
    rows: tuple[BomRow, ...]
    total: BomRow

    def to_dict(self) -> dict[str, Any]:
        return {
            "boards": self.boards,
            "rows": [asdict(r) for r in self.rows],
            "total": asdict(self.total),
        }


def _describe(part: Part) -> tuple[str, str, float | None, str, str]:
    """kind, value as shown, tolerance (%), dielectric or series, package."""
    if isinstance(part, Resistor):
        return (
            "resistor",
            format_value(part.value_ohm, "Ω"),
            part.tolerance_pct,
            part.series or "",
            part.package,
        )
    if isinstance(part, Capacitor):
        return (
            "capacitor",
            format_value(part.value_f, "F"),
            part.tolerance_pct,
            part.dielectric,
            part.package,
        )
    if isinstance(part, Pot):
        return "pot", format_value(part.value_ohm, "Ω"), part.tolerance_pct, part.kind, ""
    if isinstance(part, Diode):
        if part.vz_v is not None:
            return "diode", f"zener {format_value(part.vz_v, 'V')}", part.tolerance_pct, "", ""
        return "diode", f"{part.kind} diode", None, "", ""
    if isinstance(part, Comparator):
        return "comparator", f"{part.output} comparator", None, "", ""
    assert isinstance(part, OpAmp)
    channels = "dual" if part.channels >= 2 else "single"
    return "opamp", f"{channels} op amp", None, "", ""


def bill_of_materials(design: AnyBoard, boards: int) -> Bom:
    """The BOM of ``design`` for ``boards`` boards (see the module docstring)."""
    if boards < 1:
        raise ValueError(f"boards: must be at least 1, got {boards}")
    uses = design.uses()
    names: dict[str, list[str]] = {}
    first: dict[str, Part] = {}
    for name, part in design.parts().items():
        names.setdefault(part.id, []).append(name)
        first.setdefault(part.id, part)
    rows = []
    for pid, part in first.items():
        kind, value, tol, grade, package = _describe(part)
        per_board = uses[pid]
        build = per_board * boards
        rows.append(
            BomRow(
                stock_code=pid,
                designators=" ".join(names[pid]),
                kind=kind,
                value=value,
                tolerance_pct=tol,
                dielectric_or_series=grade,
                package=package,
                pieces_per_board=per_board,
                pieces_for_build=build,
                unit_cost=part.unit_cost,
                extended_cost=round(part.unit_cost * build, 6),
                stock=part.stock,
                stock_after=max(part.stock - build, 0),
                shortfall=max(build - part.stock, 0),
            )
        )
    total = BomRow(
        stock_code="TOTAL",
        designators="",
        kind="",
        value="",
        tolerance_pct=None,
        dielectric_or_series="",
        package="",
        pieces_per_board=sum(r.pieces_per_board for r in rows),
        pieces_for_build=sum(r.pieces_for_build for r in rows),
        unit_cost=round(sum((r.unit_cost or 0.0) * r.pieces_per_board for r in rows), 6),
        extended_cost=round(sum(r.extended_cost for r in rows), 6),
        stock=None,
        stock_after=None,
        shortfall=sum(r.shortfall for r in rows),
    )
    return Bom(boards=boards, rows=tuple(rows), total=total)


def bom_csv(bom: Bom) -> str:
    """The BOM as CSV text: a header row, one row per stock code, the total row (blank cells
    where a figure does not apply). Encode as UTF-8."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(COLUMNS)
    for row in (*bom.rows, bom.total):
        cells = asdict(row)
        writer.writerow(["" if cells[c] is None else cells[c] for c in COLUMNS])
    return out.getvalue()
