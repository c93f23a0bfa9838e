"""Service settings: where the catalog is, who may write stock, and the request limits.

Read from the environment by :meth:`Settings.from_env` (``TRISTOCK_CATALOG``,
``TRISTOCK_TOKEN``, ``TRISTOCK_ALLOW_OPEN_WRITES``); every limit has a stated default.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Final

#: Hard ceilings that appear in the OpenAPI schema; settings may only lower them.
MAX_TOP: Final[int] = 50
MAX_TIME_LIMIT_S: Final[float] = 30.0
MAX_POINTS: Final[int] = 20_000
MAX_PERIODS: Final[int] = 200
MAX_SAMPLES: Final[int] = 100_000
MAX_PAGE: Final[int] = 500
MAX_STOCK: Final[int] = 1_000_000_000

_TRUE = frozenset({"1", "true", "yes", "on"})


def default_catalog_dir() -> Path:
    """The bundled demo stock room (same folder the CLI's ``--example`` uses)."""
    from tristock.cli import demo_catalog_dir

    return demo_catalog_dir()


@dataclass(frozen=True, slots=True)
class Settings:
    """Everything the app needs to know at start-up.

    ``token``: when set, stock writes need ``Authorization: Bearer <token>``. When it is None,
    writes are refused unless ``allow_open_writes`` is True (an explicit start-up flag).
    ``max_body_bytes``: larger request bodies get 413. ``max_searches``: CPU-bound requests
    (design, reoptimise, analyse, simulate) running at once; a request that finds every slot
    busy waits up to ``search_wait_s`` seconds, then gets 503.
    ``default_time_limit_s`` / ``max_time_limit_s``: per-request search time (s); a larger
    request is cut to the cap (the answer's ``search.time_limit_s`` shows the limit used).
    ``cache_size``: design/reoptimise answers kept per worker for repeated requests on the
    same catalog (0 turns the cache off).
    """

    catalog_dir: Path
    token: str | None = None
    allow_open_writes: bool = False
    max_body_bytes: int = 256 * 1024
    max_top: int = MAX_TOP
    default_time_limit_s: float = 5.0
    max_time_limit_s: float = MAX_TIME_LIMIT_S
    max_searches: int = 2
    search_wait_s: float = 2.0
    max_samples: int = MAX_SAMPLES
    max_page: int = MAX_PAGE
    cache_size: int = 256

    def __post_init__(self) -> None:
        checks = (
            ("max_body_bytes", self.max_body_bytes > 0),
            ("max_top", 1 <= self.max_top <= MAX_TOP),
            ("max_time_limit_s", 0 < self.max_time_limit_s <= MAX_TIME_LIMIT_S),
            ("default_time_limit_s", 0 < self.default_time_limit_s <= self.max_time_limit_s),
            ("max_searches", self.max_searches >= 1),
            ("search_wait_s", self.search_wait_s >= 0),
            ("max_samples", 1 <= self.max_samples <= MAX_SAMPLES),
            ("max_page", 1 <= self.max_page <= MAX_PAGE),
            ("cache_size", self.cache_size >= 0),
        )
        for name, ok in checks:
            if not ok:
                raise ValueError(f"settings.{name}: {getattr(self, name)!r} is out of range")
        if self.token is not None and not self.token.strip():
            raise ValueError("settings.token: an empty token is not a token (leave it unset)")

    @classmethod
    def from_env(cls, environ: dict[str, str] | None = None) -> Settings:
        """Settings from ``TRISTOCK_CATALOG`` (default: the demo catalog), ``TRISTOCK_TOKEN``
        and ``TRISTOCK_ALLOW_OPEN_WRITES`` (1/true/yes/on)."""
        env = os.environ if environ is None else environ
        catalog = env.get("TRISTOCK_CATALOG")
        token = env.get("TRISTOCK_TOKEN") or None
        open_writes = env.get("TRISTOCK_ALLOW_OPEN_WRITES", "").strip().lower() in _TRUE
        return cls(
            catalog_dir=Path(catalog) if catalog else default_catalog_dir(),
            token=token,
            allow_open_writes=open_writes,
        )
