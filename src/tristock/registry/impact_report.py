"""The impact report's shape, for the CLI's ``--json`` and ``POST /v1/impact``."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")


class DesignNeed(_Out):
    name: str
    needed: int


class OverSubscribed(_Out):
    """A stock code whose stock is less than all active planned builds need together."""

    id: str
    stock: int
    needed: int
    short: int
    designs: list[DesignNeed]


class CodeNeed(_Out):
    id: str
    needed: int  # this design's planned build
    stock: int


class AffectedDesign(_Out):
    name: str
    revision: int
    kind: str
    boards: int
    codes: list[CodeNeed]


class Figures(_Out):
    """The full model at nominal values (before: the release's snapshot)."""

    frequency_hz: float | None
    amplitude_vpp: float | None
    yield_fraction: float | None
    cost: float | None


class PartChange(_Out):
    designator: str
    from_id: str | None
    to_id: str | None


class ProposedDesign(_Out):
    name: str
    revision: int
    changed: list[str]
    changes: list[PartChange]
    design_after: dict[str, Any]  # the DESIGN file's parts (and wiper) after the change
    before: Figures
    after: Figures


class Allocation(_Out):
    """Pieces of one stock code: what unaffected builds keep, what each affected design gets."""

    id: str
    stock: int
    unaffected: int
    allocated: dict[str, int]
    spare: int


class Proposal(_Out):
    total_changes: int
    lower_bound: int | None
    proven: bool
    status: str
    designs: list[ProposedDesign]
    allocation: list[Allocation]
    solve_s: float
    bound_s: float


class DesignWork(_Out):
    """One affected design's re-solve: options found, re-optimisations run, seconds."""

    name: str
    options: int
    searches: int
    seconds: float
    proven: bool


class StockOverride(_Out):
    id: str
    stock_before: int
    stock_after: int


class ImpactReport(_Out):
    catalog_fingerprint: str
    what_if: list[StockOverride]
    active_designs: int
    over_subscribed: list[OverSubscribed]
    affected: list[AffectedDesign]
    proposal: Proposal | None
    no_proposal_reason: str | None
    message: str
    work: list[DesignWork]
    extra_rounds: int  # rounds that widened crowded designs' options (see ImpactSettings)
    scheduler: str
    elapsed_s: float
