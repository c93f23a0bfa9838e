"""Which parts of a tuned design stay, which must go: shortfall, indices, masks."""

from __future__ import annotations

import numpy as np

from tristock.designs.results import Shortfall
from tristock.designs.tuned.model import TunedModel
from tristock.stock.catalog import Catalog


def tuned_shortfall(catalog: Catalog, current: dict[str, str], boards: int) -> list[Shortfall]:
    """Parts short for ``boards`` boards and by how many pieces (a code in several positions
    needs one piece per position; a single-channel op amp two)."""
    uses: dict[str, int] = {}
    for name, pid in current.items():
        part = catalog.get(pid) if pid in catalog else None
        per = getattr(part, "packages_per_board", 1) if name == "U1" else 1
        uses[pid] = uses.get(pid, 0) + per
    out, seen = [], set()
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


def part_index(model: TunedModel, designator: str, pid: str) -> int | None:
    if designator == "U1":
        return next((o.index for o in model.opamps if o.part.id == pid), None)
    if designator == "RV1":
        return next((i for i, p in enumerate(model.pots) if p.id == pid), None)
    table = model.capacitors if designator.startswith("C") else model.resistors
    return next((i for i, p in enumerate(table.parts) if p.id == pid), None)


def table_size(model: TunedModel, designator: str) -> int:
    if designator == "U1":
        return len(model.opamps)
    if designator == "RV1":
        return len(model.pots)
    return len(model.resistors)


def masks(
    model: TunedModel,
    shared: tuple[str, ...],
    changed: tuple[str, ...],
    pinned: dict[str, int | None],
) -> dict[str, np.ndarray] | None:
    """Pinned designators keep their part; changed ones must take another (None when a
    pinned part cannot be used)."""
    masks = {}
    for d in shared:
        mask = np.zeros(table_size(model, d), dtype=bool)
        if d in changed:
            mask[:] = True
            if pinned[d] is not None:
                mask[pinned[d]] = False
        else:
            if pinned[d] is None:
                return None
            mask[pinned[d]] = True
        masks[d] = mask
    return masks
