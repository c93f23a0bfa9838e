"""Alembic's environment: migrations run on the connection ``tristock.registry.db`` hands over
in ``config.attributes["connection"]`` (no alembic.ini, no URL of its own). Imported outside
a migration run (a plain import of every module) it does nothing."""

from __future__ import annotations

from alembic import context

from tristock.registry.schema import metadata


def run_migrations() -> None:
    connection = context.config.attributes["connection"]
    context.configure(connection=connection, target_metadata=metadata)
    with context.begin_transaction():
        context.run_migrations()


try:
    context.config  # noqa: B018  (present only while Alembic runs this file)
except AttributeError:
    pass
else:
    run_migrations()
