"""``tristock serve``: run the HTTP API (``tristock.api.app``) with uvicorn, on loopback by
default.

This command is where the CLI hands over to the HTTP layer (``tristock.api``, the repository's
``api/`` folder): it validates the service settings once (``TRISTOCK_*`` variables, see
``tristock.api.settings``), configures logging, and starts uvicorn with the factory
``tristock.api.app:app_from_env``, which builds exactly one app in each worker. Connections use
``tristock.api.connections.DeadlineH11Protocol`` (a complete request within
``request_timeout_s``, else 408 and close). This is the only module under ``src/tristock``
that imports ``tristock.api`` (the CLI's ``serve`` command calls it).
"""

from __future__ import annotations

import copy
import logging
import logging.config
import os
from pathlib import Path
from typing import Any

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8000
APP_FACTORY = "tristock.api.app:app_from_env"
HTTP_PROTOCOL = "tristock.api.connections:DeadlineH11Protocol"

log = logging.getLogger("tristock.serve")


def logging_config() -> dict[str, Any]:
    """uvicorn's logging set-up plus the ``tristock`` loggers (catalog loads, reload errors,
    closed connections, the supervisor watch) on the same stderr handler."""
    from uvicorn.config import LOGGING_CONFIG

    config = copy.deepcopy(LOGGING_CONFIG)
    config["formatters"]["tristock"] = {
        "()": "uvicorn.logging.DefaultFormatter",
        "fmt": "%(levelprefix)s %(name)s: %(message)s",
    }
    config["handlers"]["tristock"] = {
        "formatter": "tristock",
        "class": "logging.StreamHandler",
        "stream": "ext://sys.stderr",
    }
    config["loggers"]["tristock"] = {"handlers": ["tristock"], "level": "INFO", "propagate": False}
    return config


def serve(
    host: str = DEFAULT_HOST,
    port: int = DEFAULT_PORT,
    catalog: str | os.PathLike[str] | None = None,
    workers: int = 1,
    allow_open_writes: bool = False,
) -> None:
    """Serve the API until interrupted.

    ``catalog``: the catalog folder (default: ``TRISTOCK_CATALOG``, else the bundled demo).
    ``workers`` > 1 starts that many processes under a supervisor (stock writes stay safe:
    the catalog's file lock serialises them across processes); a worker whose supervisor dies
    stops serving. ``allow_open_writes`` (or ``TRISTOCK_ALLOW_OPEN_WRITES=1``) allows stock
    writes without a token. Every other setting comes from ``TRISTOCK_*`` variables, which
    reach the workers through the environment. Raises ValueError (one line) on a bad value.
    """
    import uvicorn

    from tristock.api.settings import CATALOG_ENV, Settings, unknown_env_names

    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise ValueError(f"workers: must be an integer >= 1, got {workers!r}")
    if not 0 <= port <= 65535:
        raise ValueError(f"port: must be 0..65535, got {port}")
    if catalog is not None:
        os.environ[CATALOG_ENV] = str(Path(catalog).resolve())
    if allow_open_writes:
        os.environ["TRISTOCK_ALLOW_OPEN_WRITES"] = "1"
    settings = Settings.from_env()
    if not settings.catalog_dir.is_dir():
        raise ValueError(f"catalog: {settings.catalog_dir} is not a folder")
    config = logging_config()
    logging.config.dictConfig(config)
    for name in unknown_env_names():
        log.warning("ignoring %s: no such setting (check the spelling)", name)
    uvicorn.run(
        APP_FACTORY,
        factory=True,
        host=host,
        port=port,
        workers=workers,
        http=HTTP_PROTOCOL,
        timeout_keep_alive=settings.keep_alive_s,
        timeout_graceful_shutdown=settings.shutdown_grace_s,
        timeout_worker_healthcheck=settings.worker_healthcheck_s,
        log_config=config,
        log_level="info",
    )
