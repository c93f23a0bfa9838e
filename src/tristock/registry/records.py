"""What the registry answers, for the CLI's ``--json`` and the HTTP API (same field names)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel, ConfigDict


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")


class RevisionOut(_Out):
    """One revision of a released design, as stored (never changed after it is written).

    ``design`` is the DESIGN file's ``parts`` (designator -> stock code) with ``wiper`` and
    ``range``; ``pieces`` the pieces per board of each stock code; ``analysis`` the full
    model's snapshot at release (``predicted``, ``worst_case``, ``yield_fraction``, ``cost``).
    """

    name: str
    revision: int
    source: str  # release | accept | plan
    kind: str  # fixed | trimmed | tuned
    boards: int
    note: str
    spec: dict[str, Any]
    design: dict[str, Any]
    pieces: dict[str, int]
    analysis: dict[str, Any]
    catalog_fingerprint: str
    created_at: str
    created_by: str
    retired: bool

    @property
    def parts(self) -> dict[str, str]:
        parts: dict[str, str] = self.design["parts"]
        return parts

    def design_file(self) -> dict[str, Any]:
        """The revision as a DESIGN file mapping (``analyse``, ``reoptimise`` take it)."""
        return {"spec": self.spec, **self.design}


class DesignSummary(_Out):
    name: str
    revision: int
    revisions: int
    kind: str
    boards: int
    parts: dict[str, str]
    frequency_hz: float | None
    yield_fraction: float | None
    retired: bool
    created_at: str
    updated_at: str


class FieldChange(_Out):
    field: str
    before: Any
    after: Any


class RevisionDiff(_Out):
    name: str
    before: int
    after: int
    parts: list[FieldChange]
    boards: FieldChange | None
    spec: list[FieldChange]
    analysis: list[FieldChange]
    same_catalog: bool


class PartNeed(_Out):
    """One stock code of a planned build: pieces this build needs, pieces the other active
    designs' builds need, and the stock."""

    id: str
    designators: list[str]
    needed: int
    others: int
    stock: int | None
    covered: bool


class PlanOut(_Out):
    revision: RevisionOut
    needs: list[PartNeed]
    covered: bool


@dataclass(frozen=True)
class Draft:
    """A revision about to be written: everything but its number, time and author."""

    name: str
    kind: str
    boards: int
    note: str
    spec: dict[str, Any]
    design: dict[str, Any]
    designator_pieces: dict[str, int]  # pieces per board of each designator (U1: 1 or 2)
    analysis: dict[str, Any]
    catalog_fingerprint: str
