"""The registry's first schema: designs, revisions, revision_parts.

Revision ID: 0001
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "designs",
        sa.Column("name", sa.String(100), primary_key=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(200), nullable=False),
        sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("retired_by", sa.String(200), nullable=True),
    )
    op.create_table(
        "revisions",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("design_name", sa.String(100), sa.ForeignKey("designs.name"), nullable=False),
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
    op.create_table(
        "revision_parts",
        sa.Column("revision_id", sa.Integer, sa.ForeignKey("revisions.id"), primary_key=True),
        sa.Column("designator", sa.String(8), primary_key=True),
        sa.Column("part_id", sa.String(200), nullable=False),
        sa.Column("pieces_per_board", sa.Integer, nullable=False),
    )
    op.create_index("ix_revision_parts_part_id", "revision_parts", ["part_id"])


def downgrade() -> None:
    op.drop_index("ix_revision_parts_part_id", table_name="revision_parts")
    op.drop_table("revision_parts")
    op.drop_table("revisions")
    op.drop_table("designs")
