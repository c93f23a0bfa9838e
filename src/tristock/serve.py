"""``tristock serve``: run the HTTP API (``api.app``) with uvicorn, on loopback by default."""

from __future__ import annotations

import os
from pathlib import Path

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8000


def serve(
    host: str = DEFAULT_HOST,
    port: int = DEFAULT_PORT,
    catalog: str | os.PathLike[str] | None = None,
    workers: int = 1,
    allow_open_writes: bool = False,
) -> None:
    """Serve the API until interrupted.

    ``catalog``: the catalog folder (default: the bundled demo). ``workers`` > 1 starts that
    many processes (stock writes stay safe: the catalog's file lock serialises them across
    processes). The settings reach each worker through the environment (``TRISTOCK_CATALOG``,
    ``TRISTOCK_ALLOW_OPEN_WRITES``; ``TRISTOCK_TOKEN`` is read from it as it is).
    """
    import uvicorn

    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise ValueError(f"workers: must be an integer >= 1, got {workers!r}")
    if not 0 <= port <= 65535:
        raise ValueError(f"port: must be 0..65535, got {port}")
    if catalog is not None:
        os.environ["TRISTOCK_CATALOG"] = str(Path(catalog).resolve())
    os.environ["TRISTOCK_ALLOW_OPEN_WRITES"] = "1" if allow_open_writes else "0"
    uvicorn.run(
        "api.app:app_from_env",
        factory=True,
        host=host,
        port=port,
        workers=workers,
        log_level="info",
    )
