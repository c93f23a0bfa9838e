"""Hypothetical stock changes for ``tristock impact --what-if``: applied in memory only.

A CSV file with a header row ``id,stock`` (the new count) or ``id,delta`` (added to the
count; negative to take away), one part a row, ``#`` comment lines and blank lines allowed::

    id,delta
    R1F-158K,-400

Errors name ``file:line``; a count that would leave 0..1e9 is refused.
"""

from __future__ import annotations

from dataclasses import dataclass

from tristock.spec.limits import STOCK
from tristock.stock.catalog import Catalog

#: Largest what-if file read (bytes).
MAX_BYTES = 1 << 20


class WhatIfError(ValueError):
    """A what-if file or body that cannot be applied; ``lines`` names each problem."""

    def __init__(self, lines: list[str]) -> None:
        self.lines = lines
        super().__init__("; ".join(lines))

    def __reduce__(self) -> tuple[type[WhatIfError], tuple[list[str]]]:
        return (WhatIfError, (self.lines,))  # pickles to a compute process


@dataclass(frozen=True)
class StockChange:
    id: str
    stock: int | None = None
    delta: int | None = None


def parse_what_if(text: str, source: str) -> list[StockChange]:
    """The changes in a what-if CSV; WhatIfError naming ``source:line`` for each problem."""
    rows = [
        (n, [cell.strip() for cell in line.split(",")])
        for n, line in enumerate(text.splitlines(), start=1)
        if line.strip() and not line.lstrip().startswith("#")
    ]
    if not rows:
        raise WhatIfError([f"{source}: empty (expected a header `id,stock` or `id,delta`)"])
    (first, header), body = rows[0], rows[1:]
    names = [c.lower() for c in header]
    column = (
        names[1]
        if len(names) == 2 and names[0] == "id" and names[1] in ("stock", "delta")
        else None
    )
    if column is None:
        raise WhatIfError([f"{source}:{first}: header must be `id,stock` or `id,delta`"])
    errors: list[str] = []
    changes = []
    for n, cells in body:
        if len(cells) != 2 or not cells[0]:
            errors.append(f"{source}:{n}: expected two cells, an id and a whole number")
            continue
        try:
            value = int(cells[1], 10)
        except ValueError:
            errors.append(f"{source}:{n}: {column}: expected a whole number, got {cells[1]!r}")
            continue
        changes.append(StockChange(id=cells[0], **{column: value}))
    if errors:
        raise WhatIfError(errors)
    return changes


def apply_what_if(catalog: Catalog, changes: list[StockChange]) -> dict[str, tuple[int, int]]:
    """The stock of each changed part before and after (later rows win over earlier ones);
    WhatIfError for an unknown id or a count leaving 0..1e9. The catalog is not touched."""
    errors: list[str] = []
    out: dict[str, tuple[int, int]] = {}
    for change in changes:
        if change.id not in catalog:
            errors.append(f"what-if: {change.id!r} is not in the catalog {catalog.path}")
            continue
        before = catalog.get(change.id).stock
        current = out.get(change.id, (before, before))[1]
        after = change.stock if change.stock is not None else current + (change.delta or 0)
        if not STOCK[0] <= after <= STOCK[1]:
            errors.append(f"what-if: {change.id}: stock {after} is outside {STOCK[0]}..{STOCK[1]}")
            continue
        out[change.id] = (before, after)
    if errors:
        raise WhatIfError(errors)
    return out
