"""Revisions made from other revisions: compare two, re-plan a build, accept a proposal."""

from __future__ import annotations

from typing import Any

from tristock.registry.errors import StaleProposal, UnknownDesign
from tristock.registry.impact import planned_needs, stock_of
from tristock.registry.records import (
    Draft,
    FieldChange,
    PartNeed,
    PlanOut,
    RevisionDiff,
    RevisionOut,
)
from tristock.registry.release import draft_from
from tristock.registry.store import Registry
from tristock.spec.loading import SpecError
from tristock.stock.catalog import Catalog


def _flat(data: Any, prefix: str = "") -> dict[str, Any]:
    if not isinstance(data, dict):
        return {prefix: data}
    out: dict[str, Any] = {}
    for key, value in data.items():
        out.update(_flat(value, f"{prefix}.{key}" if prefix else str(key)))
    return out


def _changes(before: dict[str, Any], after: dict[str, Any]) -> list[FieldChange]:
    a, b = _flat(before), _flat(after)
    return [
        FieldChange(field=k, before=a.get(k), after=b.get(k))
        for k in sorted(set(a) | set(b))
        if a.get(k) != b.get(k)
    ]


def diff(before: RevisionOut, after: RevisionOut) -> RevisionDiff:
    """Designators, planned build, spec fields and the snapshot's figures that differ."""
    figures = ("predicted.frequency_hz", "predicted.amplitude_vpp", "yield_fraction", "cost")
    analysis = [c for c in _changes(before.analysis, after.analysis) if c.field in figures]
    boards = (
        FieldChange(field="boards", before=before.boards, after=after.boards)
        if before.boards != after.boards
        else None
    )
    return RevisionDiff(
        name=after.name,
        before=before.revision,
        after=after.revision,
        parts=_changes(before.design, after.design),
        boards=boards,
        spec=_changes(before.spec, after.spec),
        analysis=analysis,
        same_catalog=before.catalog_fingerprint == after.catalog_fingerprint,
    )


def needs_of(rev: RevisionOut, active: list[RevisionOut], catalog: Catalog) -> list[PartNeed]:
    """Each stock code of ``rev``'s build: its need, the other active builds' need, stock."""
    others = planned_needs([r for r in active if r.name != rev.name])
    out = []
    for code, pieces in sorted(rev.pieces.items()):
        needed = rev.boards * pieces
        other = sum(others.get(code, {}).values())
        stock = stock_of(catalog, code) if code in catalog else None
        out.append(
            PartNeed(
                id=code,
                designators=sorted(d for d, p in rev.parts.items() if p == code),
                needed=needed,
                others=other,
                stock=stock,
                covered=stock is not None and needed + other <= stock,
            )
        )
    return out


def plan(registry: Registry, name: str, boards: int, catalog: Catalog) -> PlanOut:
    """A new revision of ``name`` planning ``boards`` boards (parts, spec and snapshot kept,
    the spec's ``build.boards`` set to match), and whether stock covers it beside the others."""
    latest = registry.revision(name)
    spec = {**latest.spec, "build": {**latest.spec["build"], "boards": boards}}
    # an op amp's code sits at U1 only, so its pieces per board are U1's
    pieces = {d: latest.pieces[p] if d == "U1" else 1 for d, p in latest.parts.items()}
    draft = Draft(
        name=name,
        kind=latest.kind,
        boards=boards,
        note=f"planned build {latest.boards} -> {boards} boards",
        spec=spec,
        design=latest.design,
        designator_pieces=pieces,
        analysis=latest.analysis,
        catalog_fingerprint=latest.catalog_fingerprint,
    )
    rev = registry.write(draft, source="plan")
    needs = needs_of(rev, registry.active(), catalog)
    return PlanOut(revision=rev, needs=needs, covered=all(n.covered for n in needs))


def accept(
    registry: Registry, name: str, proposal: dict[str, Any], catalog: Catalog
) -> RevisionOut:
    """Record ``name``'s part of an impact proposal (``tristock impact --json``) as its next
    revision, after checking the design against its spec again (ReleaseRefused if it fails).
    StaleProposal when the proposal was made for another revision than the latest."""
    entries = (proposal.get("proposal") or {}).get("designs")
    if not isinstance(entries, list):
        raise SpecError(["proposal: no `proposal.designs` (expected `tristock impact --json`)"])
    mine = next((e for e in entries if isinstance(e, dict) and e.get("name") == name), None)
    if mine is None:
        raise UnknownDesign(f"the proposal has no change for {name!r}")
    latest = registry.revision(name)
    if mine.get("revision") != latest.revision:
        raise StaleProposal(
            f"{name}: the proposal was made for revision {mine.get('revision')}, the latest is "
            f"{latest.revision}; run `tristock impact` again"
        )
    after = mine.get("design_after")
    if not isinstance(after, dict):
        raise SpecError([f"proposal.designs[{name}].design_after: expected an object"])
    if not mine.get("changed"):
        return latest  # nothing to change: no new revision
    listed = mine.get("changes")
    changes = ", ".join(
        f"{c.get('designator')} {c.get('from_id')} -> {c.get('to_id')}"
        for c in (listed if isinstance(listed, list) else [])
        if isinstance(c, dict)
    )
    draft = draft_from(
        name,
        {"spec": latest.spec, **after},
        catalog,
        boards=latest.boards,
        note=f"accepted impact proposal: {changes}",
    )
    return registry.write(draft, source="accept")
