"""The registry's tables (SQLAlchemy Core), the same on SQLite and PostgreSQL.

- ``designs``: one row per released name; ``retired_at`` set when it is retired (its planned
  builds then count for nothing).
- ``revisions``: revision 1, 2, ... of a name, never updated once written; a unique
  constraint on (name, revision) makes two writers that pick the same number collide, and the
  loser retries with the next number.
- ``revision_parts``: designator -> stock code and pieces per board of each revision, indexed
  by stock code: the part -> designs index that tells which designs a stock change touches.

The Alembic migrations in ``tristock/registry/migrations`` create exactly these tables;
``tests/registry/test_schema.py`` compares the two.
"""

from __future__ import annotations

import sqlalchemy as sa

metadata = sa.MetaData()

NAME_MAX = 100

designs = sa.Table(
    "designs",
    metadata,
    sa.Column("name", sa.String(NAME_MAX), primary_key=True),
    sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
    sa.Column("created_by", sa.String(200), nullable=False),
    sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True),
    sa.Column("retired_by", sa.String(200), nullable=True),
)

revisions = sa.Table(
    "revisions",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
    sa.Column("design_name", sa.String(NAME_MAX), sa.ForeignKey("designs.name"), nullable=False),
    sa.Column("revision", sa.Integer, nullable=False),
    sa.Column("source", sa.String(16), nullable=False),
    sa.Column("kind", sa.String(16), nullable=False),
    sa.Column("boards", sa.Integer, nullable=False),
    sa.Column("note", sa.Text, nullable=False),
    sa.Column("spec", sa.JSON, nullable=False),
    sa.Column("design", sa.JSON, nullable=False),
    sa.Column("analysis", sa.JSON, nullable=False),
    sa.Column("catalog_fingerprint", sa.String(64), nullable=False),
    sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
    sa.Column("created_by", sa.String(200), nullable=False),
    sa.UniqueConstraint("design_name", "revision", name="uq_revisions_name_revision"),
)

revision_parts = sa.Table(
    "revision_parts",
    metadata,
    sa.Column("revision_id", sa.Integer, sa.ForeignKey("revisions.id"), primary_key=True),
    sa.Column("designator", sa.String(8), primary_key=True),
    sa.Column("part_id", sa.String(200), nullable=False),
    sa.Column("pieces_per_board", sa.Integer, nullable=False),
    sa.Index("ix_revision_parts_part_id", "part_id"),
)
