"""A release: a DESIGN file checked against its spec, with the full model's snapshot.

The check is the re-optimisation's verdict on the design as it is (``tristock.designs.reoptimise``,
which dispatches fixed, trimmed and tuned designs alike) on the catalog with every stock count
lifted to the ceiling: the spec, its limits and the full model decide; stock does not (a
planned build short of stock is what ``tristock impact`` reports). A design that passes is its
own 0-change answer, whose prediction, worst case and yield become the snapshot.
"""

from __future__ import annotations

import dataclasses
import hashlib
from typing import Any

from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import ReoptimiseResult
from tristock.export.designfile import parse_design
from tristock.registry.errors import ReleaseRefused
from tristock.registry.records import Draft
from tristock.spec.limits import STOCK
from tristock.spec.loading import SpecError, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, part_version

#: Monte Carlo samples of a release's snapshot (the re-optimisation's default).
SNAPSHOT_SAMPLES = 4000
#: The check's time limit (s): a design that passes is decided at its first step.
CHECK_TIME_LIMIT_S = 20.0


def catalog_fingerprint(catalog: Catalog) -> str:
    """SHA-256 (first 32 hex digits) over the version tags of every part, stock included,
    in stock-code order: equal fingerprints mean the same parts, values and counts."""
    tags = sorted(f"{p.id}={part_version(p)}" for p in catalog)
    return hashlib.sha256("\n".join(tags).encode("utf-8")).hexdigest()[:32]


def with_stock(catalog: Catalog, stock: dict[str, int]) -> Catalog:
    """``catalog`` with the stock of the parts named in ``stock`` replaced (others kept);
    KeyError for a code not in the catalog."""
    for part_id in stock:
        catalog.get(part_id)
    if not stock:
        return catalog

    def fix(parts: tuple[Any, ...]) -> tuple[Any, ...]:
        return tuple(
            dataclasses.replace(p, stock=stock[p.id]) if p.id in stock else p for p in parts
        )

    return dataclasses.replace(
        catalog,
        resistors=fix(catalog.resistors),
        capacitors=fix(catalog.capacitors),
        opamps=fix(catalog.opamps),
        pots=fix(catalog.pots),
        comparators=fix(catalog.comparators),
        diodes=fix(catalog.diodes),
    )


def ample(catalog: Catalog) -> Catalog:
    """``catalog`` with every stock count at the ceiling (stock decides nothing)."""
    return dataclasses.replace(
        catalog,
        resistors=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.resistors),
        capacitors=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.capacitors),
        opamps=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.opamps),
        pots=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.pots),
        comparators=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.comparators),
        diodes=tuple(dataclasses.replace(p, stock=STOCK[1]) for p in catalog.diodes),
    )


def kind_of(spec: Spec) -> str:
    """``fixed``, ``trimmed`` (a trimmer in series with R3) or ``tuned`` (a panel pot)."""
    if spec.tuning is not None:
        return "tuned"
    return "trimmed" if spec.trimmed else "fixed"


def with_boards(spec: Spec, boards: int | None) -> Spec:
    if boards is None:
        return spec
    data = spec.model_dump()
    data["build"]["boards"] = boards
    return parse_spec(data)


def snapshot(result: ReoptimiseResult) -> dict[str, Any]:
    """The full model's figures of the 0-change answer: prediction, worst case, yield, cost."""
    kept = result.candidates[0]
    return {
        "predicted": kept.predicted.model_dump(mode="json"),
        "worst_case": kept.worst_case,
        "yield_fraction": kept.yield_fraction,
        "cost": kept.cost,
        "samples": SNAPSHOT_SAMPLES,
    }


def draft_from(
    name: str,
    data: dict[str, Any],
    catalog: Catalog,
    *,
    boards: int | None = None,
    note: str = "",
) -> Draft:
    """The revision ``data`` (a DESIGN mapping) would become; SpecError for a malformed
    file, ReleaseRefused (with the reasons) for a design that does not meet its spec."""
    spec, design = parse_design(data, catalog)
    spec = with_boards(spec, boards)
    ids = {designator: part.id for designator, part in design.parts().items()}
    result = reoptimise(
        spec,
        ample(catalog),
        ids,
        top=1,
        time_limit_s=CHECK_TIME_LIMIT_S,
        samples=SNAPSHOT_SAMPLES,
        topology=design.topology.name,
    )
    if not (result.original.passes and result.candidates and not result.candidates[0].changed):
        raise ReleaseRefused(name, result.original.reasons or ["the full model rejects it"])
    uses = design.uses()
    pieces = {d: (uses[part_id] if d == "U1" else 1) for d, part_id in ids.items()}
    layout: dict[str, Any] = {"parts": ids}
    if design.topology.name != "opamp_schmitt":  # a variant's board names its circuit
        layout["topology"] = design.topology.name
    if "RV1" in ids:
        layout["wiper"] = design.wiper
    if "C2" in ids:
        layout["range"] = f"C{design.selected + 1}"
    return Draft(
        name=name,
        kind=kind_of(spec),
        boards=spec.build.boards,
        note=note,
        spec=spec.model_dump(mode="json"),
        design=layout,
        designator_pieces=pieces,
        analysis=snapshot(result),
        catalog_fingerprint=catalog_fingerprint(catalog),
    )


def design_mapping(data: dict[str, Any], rank: int | None) -> dict[str, Any]:
    """A DESIGN mapping from a file that is one, or from a ``design --json`` answer (its
    candidate ``rank``, default 1); SpecError naming the field otherwise."""
    if "candidates" not in data:
        if rank is not None:
            raise SpecError(["rank: only a `design --json` answer has ranks"])
        return data
    candidates = data["candidates"]
    wanted = rank or 1
    if not isinstance(candidates, list) or not 1 <= wanted <= len(candidates):
        count = len(candidates) if isinstance(candidates, list) else 0
        raise SpecError([f"candidates: no rank {wanted} (the answer has {count})"])
    chosen = candidates[wanted - 1]
    if not isinstance(chosen, dict):
        raise SpecError([f"candidates[{wanted - 1}]: expected an object"])
    out: dict[str, Any] = {"spec": data.get("spec"), "parts": chosen.get("parts")}
    trim = chosen.get("trim")
    if isinstance(trim, dict) and "wiper_nominal" in trim:
        out["wiper"] = trim["wiper_nominal"]
    return out
