"""Parts of a design its stock cannot cover for a run of boards."""

from __future__ import annotations

from tristock.designs.results import Shortfall
from tristock.stock.catalog import Catalog


def shortfall(catalog: Catalog, current: dict[str, str], boards: int) -> list[Shortfall]:
    """Parts of the design short for ``boards`` boards, and by how many pieces.

    A stock code in two positions needs two pieces a board; a single-channel op amp two,
    unless a comparator IC (U2) does the comparing and U1 only integrates
    (``circuits.board.Design.u1_packages``).
    """
    uses: dict[str, int] = {}
    for name, pid in current.items():
        part = catalog.get(pid) if pid in catalog else None
        both = name == "U1" and "U2" not in current
        per = getattr(part, "packages_per_board", 1) if both else 1
        uses[pid] = uses.get(pid, 0) + per
    out = []
    seen: set[str] = set()
    for name, pid in current.items():
        if pid in seen:
            continue
        seen.add(pid)
        stock = catalog.get(pid).stock if pid in catalog else 0
        needed = boards * uses[pid]
        if stock < needed:
            out.append(
                Shortfall(designator=name, id=pid, needed=needed, stock=stock, short=needed - stock)
            )
    return out
