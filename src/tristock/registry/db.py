"""Where the registry lives and how it is opened: a URL, an engine, the schema migrated.

The URL is, first found: the one given (``--db``), ``TRISTOCK_DB``, else an SQLite file
``registry.sqlite`` beside the catalog's tables. A value without ``://`` is a file path.
``postgresql+psycopg://user@/db?host=/socket/dir`` reaches a team's PostgreSQL; the schema is
the same. Opening migrates the schema to the newest Alembic revision (the migrations ship
inside the package), once per process and URL.

SQLite writers are serialised by ``BEGIN IMMEDIATE`` (the database's write lock taken at the
start of each transaction, waiting up to 30 s for another writer) in WAL mode, so readers go
on beside a writer. On PostgreSQL transactions run at READ COMMITTED; the unique constraint on
(name, revision) settles two writers that chose the same revision number.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory

from tristock.registry.errors import RegistryUnavailable

#: The registry file's name beside a catalog's tables.
DEFAULT_FILE = "registry.sqlite"
#: Seconds an SQLite writer waits for another writer's lock.
SQLITE_BUSY_S = 30.0
MIGRATIONS = Path(__file__).with_name("migrations")

_migrated: set[str] = set()
_migrate_lock = threading.Lock()


def database_url(catalog_dir: str | Path | None, given: str | None = None) -> str:
    """The registry's URL: ``given``, ``TRISTOCK_DB``, or ``registry.sqlite`` in
    ``catalog_dir``; RegistryUnavailable when there is none of the three."""
    value = given or os.environ.get("TRISTOCK_DB") or None
    if value is None:
        if catalog_dir is None:
            raise RegistryUnavailable(
                "no registry: give --catalog DIR (the registry sits beside its tables) or "
                "--db URL, or set TRISTOCK_DB"
            )
        value = str(Path(catalog_dir) / DEFAULT_FILE)
    if "://" not in value:
        return f"sqlite:///{Path(value).expanduser().resolve()}"
    return value


def _sqlite_setup(engine: sa.Engine) -> None:
    @sa.event.listens_for(engine, "connect")
    def connect(dbapi_connection: Any, _: Any) -> None:
        dbapi_connection.isolation_level = None  # we issue BEGIN ourselves
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA journal_mode=WAL")
        cursor.execute("PRAGMA foreign_keys=ON")
        cursor.close()

    @sa.event.listens_for(engine, "begin")
    def begin(connection: sa.Connection) -> None:
        connection.exec_driver_sql("BEGIN IMMEDIATE")


def create_engine(url: str) -> sa.Engine:
    """An engine for ``url`` with the registry's transaction settings (not yet migrated)."""
    try:
        parsed = sa.engine.make_url(url)
    except sa.exc.ArgumentError as err:
        raise RegistryUnavailable(f"registry URL {url!r}: {err}") from None
    if parsed.get_backend_name() == "sqlite":
        database = parsed.database or ""
        if database and database != ":memory:" and not Path(database).parent.is_dir():
            raise RegistryUnavailable(f"registry {database}: folder does not exist")
        engine = sa.create_engine(parsed, connect_args={"timeout": SQLITE_BUSY_S})
        _sqlite_setup(engine)
        return engine
    try:
        return sa.create_engine(parsed, pool_pre_ping=True, connect_args=_connect_args(parsed))
    except (ImportError, sa.exc.NoSuchModuleError) as err:
        raise RegistryUnavailable(f"registry URL {parsed.render_as_string()}: {err}") from None


def _connect_args(url: sa.URL) -> dict[str, Any]:
    return {"connect_timeout": 5} if url.get_backend_name() == "postgresql" else {}


def _head() -> str | None:
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    return ScriptDirectory.from_config(config).get_current_head()


def migrate(engine: sa.Engine) -> None:
    """Bring the schema to the newest migration (a no-op when it is there already)."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    with engine.begin() as connection:
        if connection.dialect.name == "postgresql":  # one migrating process at a time
            connection.execute(sa.text("SELECT pg_advisory_xact_lock(7316001)"))
        current = MigrationContext.configure(connection).get_current_revision()
        if current == _head():
            return
        config.attributes["connection"] = connection
        command.upgrade(config, "head")


def open_engine(url: str) -> sa.Engine:
    """An engine on ``url`` with the schema migrated; RegistryUnavailable if unreachable."""
    engine = create_engine(url)
    with _migrate_lock:
        if url in _migrated:
            return engine
        try:
            migrate(engine)
        except sa.exc.SQLAlchemyError as err:
            engine.dispose()
            raise unavailable(url, err) from None
        _migrated.add(url)
    return engine


def unavailable(url: str, err: BaseException) -> RegistryUnavailable:
    """A one-line RegistryUnavailable for a database error (no password in it)."""
    shown = sa.engine.make_url(url).render_as_string(hide_password=True)
    reason = str(getattr(err, "orig", None) or err).strip().splitlines()
    return RegistryUnavailable(f"registry {shown}: {reason[0] if reason else type(err).__name__}")
