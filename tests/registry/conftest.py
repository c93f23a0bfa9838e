"""The registry suite's databases: every test that takes ``registry_url`` runs on SQLite (a
file in the test's folder) and on PostgreSQL (a database of its own, created and dropped on
the server named by ``TRISTOCK_TEST_PG_URL``; ``.ci/run`` starts one). Without that variable
the PostgreSQL runs skip locally and FAIL in CI (``CI`` set)."""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest
import sqlalchemy as sa

PG_ENV = "TRISTOCK_TEST_PG_URL"


def _postgres_database() -> Iterator[str]:
    base = os.environ.get(PG_ENV)
    if not base:
        if os.environ.get("CI"):
            pytest.fail(f"{PG_ENV} is not set: CI must run the registry suite on PostgreSQL")
        pytest.skip(f"{PG_ENV} not set (start one with .ci/postgres.sh)")
    admin_url = sa.engine.make_url(base)
    name = f"tristock_test_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(sa.text(f'CREATE DATABASE "{name}"'))
    try:
        yield admin_url.set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(sa.text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.fixture(params=["sqlite", "postgresql"])
def registry_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """A fresh, empty registry database on each backend."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'registry.sqlite'}"
    else:
        yield from _postgres_database()
