"""The service's catalog: loaded once, reloaded when its files change, last good one kept.

Each request asks :meth:`CatalogStore.current`, which compares a cheap signature of the table
files (``os.stat``: mtime in ns, size, inode, one call per file) with the one the loaded catalog
came from. On a change the catalog is reloaded; a reload that fails validation keeps the last
good catalog and records the errors (``last_error``, logged, reported at ``/health``); while
it serves that last good catalog, :attr:`CatalogStore.stale` is True.

Stock writes validate the whole catalog as they write it; :meth:`CatalogStore.adopt` installs
that catalog with the stamps of the files it came from, so reads after a write agree with the
write's answer without reloading. ``write_policy`` sets how long writes wait for other programs.
"""

from __future__ import annotations

import logging
import os
import threading
import time
from dataclasses import dataclass
from pathlib import Path

from tristock.stock.catalog import (
    DEFAULT_POLICY,
    KINDS,
    Catalog,
    CatalogError,
    FileStamp,
    StockWrite,
    WritePolicy,
    load_catalog,
)

log = logging.getLogger("tristock.api")

Signature = tuple[tuple[int, int, int] | None, ...]


class CatalogUnavailable(RuntimeError):
    """No catalog has loaded yet (the first load failed); the message says why."""


@dataclass(frozen=True, slots=True)
class ReloadError:
    """A failed (re)load: when (Unix time) and every problem, one line each."""

    at: float
    errors: tuple[str, ...]


def signature(directory: Path) -> Signature:
    """(mtime_ns, size, inode) of each table file, None for a missing one.

    An atomic replace (``os.replace``) always changes the inode, so a rewrite within one mtime
    tick is still seen.
    """
    out: list[tuple[int, int, int] | None] = []
    for kind in KINDS:
        try:
            st = os.stat(directory / f"{kind}.csv")
        except OSError:
            out.append(None)
            continue
        out.append((st.st_mtime_ns, st.st_size, st.st_ino))
    return tuple(out)


class CatalogStore:
    """Thread-safe holder of the current catalog of one directory."""

    def __init__(self, directory: Path, write_policy: WritePolicy = DEFAULT_POLICY) -> None:
        self.directory = Path(directory)
        self.write_policy = write_policy
        self._lock = threading.Lock()
        self._catalog: Catalog | None = None
        self._signature: Signature | None = None
        self._error: ReloadError | None = None
        self.reloads = 0
        self.loaded_at: float | None = None

    @property
    def last_error(self) -> ReloadError | None:
        """The errors of the last failed load; cleared by the next successful one."""
        return self._error

    @property
    def stale(self) -> bool:
        """True while the files on disk do not load and the last good catalog is served."""
        return self._catalog is not None and self._error is not None

    def current(self) -> Catalog:
        """The catalog, reloaded first if its files changed since it was read.

        Raises CatalogUnavailable when no load has ever succeeded.
        """
        return self.current_versioned()[0]

    def current_versioned(self) -> tuple[Catalog, int]:
        """The current catalog and its generation (1 for the first load, +1 per reload),
        read together so a cache keyed by the generation never mixes catalogs."""
        sig = signature(self.directory)
        if sig != self._signature:
            with self._lock:
                if sig != self._signature:  # another thread may have reloaded meanwhile
                    self._reload(sig)
        with self._lock:
            catalog, generation = self._catalog, self.reloads
        if catalog is None:
            error = self._error
            why = "; ".join(error.errors) if error else "not loaded"
            raise CatalogUnavailable(f"catalog {self.directory} is not available: {why}")
        return catalog, generation

    def peek(self) -> Catalog | None:
        """The loaded catalog without checking the files (None if none loaded)."""
        return self._catalog

    def adopt(self, write: StockWrite) -> None:
        """Serve the catalog a stock write validated and wrote (a replay carries none).

        Its signature is the stamps the files had when read (the written table's as written),
        so any change by another program since makes the next request reload."""
        if write.catalog is None or write.stamps is None:
            return
        sig = tuple(_as_signature(stamp) for stamp in write.stamps)
        with self._lock:
            self._catalog = write.catalog
            self._signature = sig
            self._error = None
            self.reloads += 1
            self.loaded_at = time.time()

    def _reload(self, sig: Signature) -> None:
        # The signature is taken before reading: a write during the load changes the files
        # again, so the next request sees a new signature and reloads once more.
        try:
            catalog = load_catalog(self.directory)
        except CatalogError as err:
            lines = tuple(str(issue) for issue in err.errors)
            self._error = ReloadError(time.time(), lines)
            log.error(
                "catalog %s did not load (%s); %s",
                self.directory,
                "; ".join(lines),
                "keeping the last good catalog" if self._catalog else "no catalog available",
            )
        except (OSError, ValueError) as err:
            self._error = ReloadError(time.time(), (f"{self.directory}: {err}",))
            log.error("catalog %s did not load: %s", self.directory, err)
        else:
            self._catalog = catalog
            self._error = None
            self.reloads += 1  # under self._lock (the caller holds it)
            self.loaded_at = time.time()
            log.info("catalog loaded: %r", catalog)
        self._signature = sig


def _as_signature(stamp: FileStamp | None) -> tuple[int, int, int] | None:
    return None if stamp is None else (stamp.mtime_ns, stamp.size, stamp.ino)
