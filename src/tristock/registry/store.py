"""The registry of released designs: revisions written once, read, listed, retired.

Every write is one transaction. A new revision takes the next number of its name; when two
writers pick the same number the unique constraint refuses the second, which starts over with
the number after (up to ``WRITE_TRIES`` times). Nothing updates or deletes a revision: a
change (``accept``, ``plan``) is a new revision, and retiring only marks the name.
"""

from __future__ import annotations

import getpass
import os
import re
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import UTC, datetime
from typing import Any

import sqlalchemy as sa

from tristock.registry.db import database_url, open_engine, unavailable
from tristock.registry.errors import (
    RegistryError,
    RegistryUnavailable,
    RetiredDesign,
    UnknownDesign,
)
from tristock.registry.records import DesignSummary, Draft, RevisionOut
from tristock.registry.schema import NAME_MAX, designs, revision_parts, revisions

#: Attempts at writing a revision when other writers keep taking its number.
WRITE_TRIES = 50
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]*$")


def check_name(name: str) -> str:
    """A design name: 1..100 characters, letters, digits, ``.``, ``_``, ``-``, starting with a
    letter or digit (so ``NAME@REV`` is never ambiguous); ValueError naming the rule."""
    if not 1 <= len(name) <= NAME_MAX or not _NAME.match(name):
        raise ValueError(
            f"name {name!r}: 1..{NAME_MAX} letters, digits, '.', '_' or '-', starting with a "
            "letter or digit"
        )
    return name


def parse_ref(ref: str) -> tuple[str, int | None]:
    """``NAME`` or ``NAME@REV`` -> (name, revision or None); ValueError when malformed."""
    name, at, rev = ref.partition("@")
    check_name(name)
    if not at:
        return name, None
    if not rev.isdigit() or int(rev) < 1:
        raise ValueError(f"{ref!r}: the revision after '@' is a whole number from 1")
    return name, int(rev)


def current_user() -> str:
    """Who writes: ``TRISTOCK_USER``, else the login name."""
    try:
        return os.environ.get("TRISTOCK_USER") or getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


def _iso(moment: datetime) -> str:
    if moment.tzinfo is None:  # SQLite keeps no zone; everything written here is UTC
        moment = moment.replace(tzinfo=UTC)
    return moment.isoformat(timespec="seconds")


class Registry:
    """Released designs in one database (see ``tristock.registry.db`` for the URL)."""

    def __init__(self, engine: sa.Engine, url: str) -> None:
        self.engine = engine
        self.url = url

    @classmethod
    def open(cls, catalog_dir: Any = None, url: str | None = None) -> Registry:
        resolved = database_url(catalog_dir, url)
        return cls(open_engine(resolved), resolved)

    def close(self) -> None:
        self.engine.dispose()

    @contextmanager
    def _transaction(self) -> Iterator[sa.Connection]:
        try:
            with self.engine.begin() as connection:
                yield connection
        except (sa.exc.OperationalError, sa.exc.InterfaceError) as err:
            raise unavailable(self.url, err) from None

    # --- writes -------------------------------------------------------------------------

    def write(self, draft: Draft, *, source: str, who: str | None = None) -> RevisionOut:
        """Store ``draft`` as the next revision of its name (creating the name at 1)."""
        check_name(draft.name)
        who = who or current_user()
        for _ in range(WRITE_TRIES):
            try:
                with self._transaction() as conn:
                    return self._write_once(conn, draft, source, who)
            except sa.exc.IntegrityError:
                continue  # another writer took this number or created the name: next one
        raise RegistryUnavailable(
            f"{draft.name}: {WRITE_TRIES} writers in a row took the next revision number"
        )

    def _write_once(self, conn: sa.Connection, draft: Draft, source: str, who: str) -> RevisionOut:
        now = datetime.now(UTC)
        row = conn.execute(sa.select(designs).where(designs.c.name == draft.name)).first()
        if row is None:
            conn.execute(designs.insert().values(name=draft.name, created_at=now, created_by=who))
        elif row.retired_at is not None:
            raise RetiredDesign(f"{draft.name} is retired; release it under another name")
        latest = conn.execute(
            sa.select(sa.func.max(revisions.c.revision)).where(
                revisions.c.design_name == draft.name
            )
        ).scalar()
        number = (latest or 0) + 1
        revision_id = conn.execute(
            revisions.insert()
            .values(
                design_name=draft.name,
                revision=number,
                source=source,
                kind=draft.kind,
                boards=draft.boards,
                note=draft.note,
                spec=draft.spec,
                design=draft.design,
                analysis=draft.analysis,
                catalog_fingerprint=draft.catalog_fingerprint,
                created_at=now,
                created_by=who,
            )
            .returning(revisions.c.id)
        ).scalar_one()
        parts = draft.design["parts"]
        conn.execute(
            revision_parts.insert(),
            [
                {
                    "revision_id": revision_id,
                    "designator": designator,
                    "part_id": part_id,
                    "pieces_per_board": draft.designator_pieces[designator],
                }
                for designator, part_id in parts.items()
            ],
        )
        return self._revision(conn, draft.name, number)

    def retire(self, name: str, who: str | None = None) -> DesignSummary:
        """Mark ``name`` retired (its planned builds no longer count); its revisions stay."""
        with self._transaction() as conn:
            row = conn.execute(sa.select(designs).where(designs.c.name == name)).first()
            if row is None:
                raise UnknownDesign(f"no released design named {name!r}")
            if row.retired_at is None:
                conn.execute(
                    designs.update()
                    .where(designs.c.name == name)
                    .values(retired_at=datetime.now(UTC), retired_by=who or current_user())
                )
            return self._summaries(conn, [name], include_retired=True)[0]

    # --- reads --------------------------------------------------------------------------

    def revision(self, name: str, number: int | None = None) -> RevisionOut:
        """Revision ``number`` of ``name`` (default: the latest); UnknownDesign if absent."""
        with self._transaction() as conn:
            return self._revision(conn, name, number)

    def designs(self, *, include_retired: bool = False) -> list[DesignSummary]:
        """Every design (by name) with its latest revision's figures."""
        with self._transaction() as conn:
            names = [r.name for r in conn.execute(sa.select(designs.c.name))]
            return self._summaries(conn, sorted(names), include_retired=include_retired)

    def active(self) -> list[RevisionOut]:
        """The latest revision of every design not retired, by name: the planned builds."""
        with self._transaction() as conn:
            latest = self._latest_numbers(conn)
            return [self._revision(conn, name, number) for name, number in latest]

    def users_of(self, part_ids: list[str]) -> list[str]:
        """Names of the active designs whose latest revision uses any of ``part_ids`` (the
        part -> designs index)."""
        if not part_ids:
            return []
        with self._transaction() as conn:
            latest = self._latest_subquery()
            query = (
                sa.select(revisions.c.design_name)
                .join(revision_parts, revision_parts.c.revision_id == revisions.c.id)
                .join(
                    latest,
                    sa.and_(
                        latest.c.design_name == revisions.c.design_name,
                        latest.c.top == revisions.c.revision,
                    ),
                )
                .join(designs, designs.c.name == revisions.c.design_name)
                .where(revision_parts.c.part_id.in_(part_ids), designs.c.retired_at.is_(None))
                .distinct()
            )
            return sorted(r[0] for r in conn.execute(query))

    def _latest_subquery(self) -> Any:
        return (
            sa.select(revisions.c.design_name, sa.func.max(revisions.c.revision).label("top"))
            .group_by(revisions.c.design_name)
            .subquery()
        )

    def _latest_numbers(self, conn: sa.Connection) -> list[tuple[str, int]]:
        latest = self._latest_subquery()
        query = (
            sa.select(latest.c.design_name, latest.c.top)
            .join(designs, designs.c.name == latest.c.design_name)
            .where(designs.c.retired_at.is_(None))
            .order_by(latest.c.design_name)
        )
        return [(r[0], int(r[1])) for r in conn.execute(query)]

    def _revision(self, conn: sa.Connection, name: str, number: int | None) -> RevisionOut:
        owner = conn.execute(sa.select(designs).where(designs.c.name == name)).first()
        if owner is None:
            raise UnknownDesign(f"no released design named {name!r}")
        query = sa.select(revisions).where(revisions.c.design_name == name)
        if number is None:
            query = query.order_by(revisions.c.revision.desc()).limit(1)
        else:
            query = query.where(revisions.c.revision == number)
        row = conn.execute(query).first()
        if row is None:
            raise UnknownDesign(f"{name} has no revision {number}")
        pieces: dict[str, int] = {}
        for part in conn.execute(
            sa.select(revision_parts).where(revision_parts.c.revision_id == row.id)
        ):
            pieces[part.part_id] = pieces.get(part.part_id, 0) + part.pieces_per_board
        return RevisionOut(
            name=name,
            revision=row.revision,
            source=row.source,
            kind=row.kind,
            boards=row.boards,
            note=row.note,
            spec=row.spec,
            design=row.design,
            pieces=pieces,
            analysis=row.analysis,
            catalog_fingerprint=row.catalog_fingerprint,
            created_at=_iso(row.created_at),
            created_by=row.created_by,
            retired=owner.retired_at is not None,
        )

    def _summaries(
        self, conn: sa.Connection, names: list[str], *, include_retired: bool
    ) -> list[DesignSummary]:
        out = []
        for name in names:
            first = self._revision(conn, name, 1)
            last = self._revision(conn, name, None)
            if last.retired and not include_retired:
                continue
            predicted = last.analysis.get("predicted") or {}
            out.append(
                DesignSummary(
                    name=name,
                    revision=last.revision,
                    revisions=last.revision,
                    kind=last.kind,
                    boards=last.boards,
                    parts=last.parts,
                    frequency_hz=predicted.get("frequency_hz"),
                    yield_fraction=last.analysis.get("yield_fraction"),
                    retired=last.retired,
                    created_at=first.created_at,
                    updated_at=last.created_at,
                )
            )
        return out


__all__ = ["Registry", "RegistryError", "check_name", "current_user", "parse_ref"]
