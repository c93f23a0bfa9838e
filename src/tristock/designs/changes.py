"""The steps every re-optimisation shares (fixed, trimmed and tuned designs): the request's
overrides and checks, which positions must change and why, the catalog without the
withdrawn parts, and what changed in an answer and why. Each job's own module
(``designs.reoptimise``, ``designs.trimmed.reoptimise``, ``designs.tuned.reoptimise``)
searches in its own way between those steps.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping, Sequence

from tristock.designs.results import Change, Shortfall
from tristock.spec.loading import SpecError, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def with_build(spec: Spec, boards: int | None, top: int | None) -> Spec:
    """``spec`` with the build's boards and the ranking's top replaced where given, validated
    again (``model_copy`` would not): a bad override is named like a bad spec field."""
    if boards is None and top is None:
        return spec
    data = spec.model_dump()
    if boards is not None:
        data["build"]["boards"] = boards
    if top is not None:
        data["ranking"]["top"] = top
    return parse_spec(data)


def check_withdrawn(catalog: Catalog, without: Sequence[str]) -> None:
    """SpecError naming every withdrawn stock code the catalog does not know."""
    unknown = [w for w in without if w not in catalog]
    if unknown:
        raise SpecError([f"without: {w!r} is not in the catalog {catalog.path}" for w in unknown])


def blocked_positions(
    catalog: Catalog,
    current: Mapping[str, str],
    without: Sequence[str],
    short: Mapping[str, Shortfall],
    boards: int,
    names: Iterable[str],
    designators: Sequence[str],
) -> tuple[dict[str, str], dict[str, str]]:
    """For each position in ``names``: must it change (withdrawn, gone from the catalog, or
    short of stock even alone), with why; or is it short only because its stock code fills
    several of ``designators`` (one of them may keep it; the search's stock rule decides).
    Returns (blocked, shared), each designator -> the reason in words."""
    blocked: dict[str, str] = {}
    shared: dict[str, str] = {}
    for name in names:
        pid = current[name]
        if pid in without:
            blocked[name] = f"{pid} is marked unavailable"
        elif pid not in catalog:
            blocked[name] = f"{pid} is no longer in the catalog"
        elif pid in short:
            s = short[pid]
            positions = [d for d in designators if current[d] == pid]
            alone = s.needed // max(len(positions), 1)
            if s.stock < alone:
                blocked[name] = f"{pid}: stock {s.stock} < {alone} needed for {boards} boards"
            else:
                shared[name] = (
                    f"{pid}: stock {s.stock} < {s.needed} needed for {boards} boards "
                    f"in {' and '.join(positions)}"
                )
    return blocked, shared


def without_parts(catalog: Catalog, without: Sequence[str]) -> Catalog:
    """The catalog with the withdrawn stock codes left out of every table."""
    gone = set(without)
    return dataclasses.replace(
        catalog,
        resistors=tuple(r for r in catalog.resistors if r.id not in gone),
        capacitors=tuple(c for c in catalog.capacitors if c.id not in gone),
        opamps=tuple(o for o in catalog.opamps if o.id not in gone),
        pots=tuple(p for p in catalog.pots if p.id not in gone),
        comparators=tuple(c for c in catalog.comparators if c.id not in gone),
        diodes=tuple(d for d in catalog.diodes if d.id not in gone),
    )


def changes_of(
    names: Sequence[str],
    current: Mapping[str, str],
    new_ids: Mapping[str, str],
    blocked: Mapping[str, str],
    outside: set[str],
) -> list[Change]:
    """What changed at each of ``names`` and why: blocked (the reason), outside the spec's
    limits or stock, or re-chosen with the others to bring the design back into spec. A
    position empty before or after (a pull-up R5 added or taken away) has no stock code
    there (None)."""
    changes = []
    for x in names:
        was = current.get(x)
        if x in blocked:
            why = blocked[x]
        elif x in outside:
            why = (
                f"{was} is outside the spec's limits or stock"
                if was is not None
                else "added: every usable stage has a part here"
            )
        else:
            others = ", ".join(o for o in names if o != x) or "nothing else"
            done = "taken away" if new_ids.get(x) is None else "re-chosen"
            why = f"{done} with {others} to bring the design back into spec"
        changes.append(Change(designator=x, from_id=was, to_id=new_ids.get(x), why=why))
    return changes
