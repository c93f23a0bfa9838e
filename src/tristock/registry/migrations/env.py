"""Alembic's environment: migrations run on the connection ``tristock.registry.db`` hands over
in ``config.attributes["connection"]`` (no alembic.ini, no URL of its own)."""

from __future__ import annotations

from alembic import context

from tristock.registry.schema import metadata

connection = context.config.attributes["connection"]
context.configure(connection=connection, target_metadata=metadata)
with context.begin_transaction():
    context.run_migrations()
