"""The catalog's writer lock: one stock write at a time, across threads, processes and
operating systems (``filelock``: ``flock`` on POSIX, ``LockFileEx`` on Windows).

The lock file lives beside the catalog when its folder is writable (``.tristock.lock``, created
only while writing and ignored by git); for a read-only catalog, which no write can change
anyway, it lives in the user's state directory, so taking it never fails on a read-only
installation. Readers take no lock: each table is replaced by an atomic rename.
"""

from __future__ import annotations

import hashlib
import os
import sys
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Final

from tristock.stock.errors import CatalogBusy

LOCK_NAME: Final[str] = ".tristock.lock"
#: How long a writer waits for the lock by default (s).
LOCK_TIMEOUT_S: Final[float] = 30.0

_thread_locks: dict[str, threading.Lock] = {}
_thread_locks_guard = threading.Lock()


def state_directory() -> Path:
    """The user's state directory for tristock: ``$XDG_STATE_HOME/tristock`` (default
    ``~/.local/state/tristock``) on Linux and BSD, ``%LOCALAPPDATA%\\tristock`` on Windows,
    ``~/Library/Application Support/tristock`` on macOS."""
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or str(Path.home() / "AppData" / "Local")
        return Path(base) / "tristock"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Application Support" / "tristock"
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base) / "tristock"


def lock_path(catalog_dir: str | os.PathLike[str]) -> Path:
    """Where the writer lock of ``catalog_dir`` lives (see the module docstring)."""
    directory = Path(catalog_dir)
    if os.access(directory, os.W_OK):
        return directory / LOCK_NAME
    digest = hashlib.sha256(str(directory.resolve()).encode("utf-8")).hexdigest()[:16]
    return state_directory() / "locks" / f"{digest}.lock"


def _thread_lock(path: Path) -> threading.Lock:
    with _thread_locks_guard:
        return _thread_locks.setdefault(str(path), threading.Lock())


@contextmanager
def catalog_lock(
    catalog_dir: str | os.PathLike[str], timeout_s: float = LOCK_TIMEOUT_S
) -> Iterator[Path]:
    """Hold the exclusive writer lock of ``catalog_dir``; yields the lock file's path.

    Threads of one process queue on an in-process lock first, then take the file lock; a
    writer that cannot get both within ``timeout_s`` seconds raises :class:`CatalogBusy`.
    OSError if the lock file cannot be created.
    """
    path = lock_path(catalog_dir)
    if path.parent != Path(catalog_dir):
        path.parent.mkdir(parents=True, exist_ok=True)
    deadline = time.monotonic() + timeout_s
    thread_lock = _thread_lock(path)
    import filelock  # here, not at the top: only writers lock, and reads should start fast

    if not thread_lock.acquire(timeout=timeout_s):
        raise _busy(catalog_dir, timeout_s)
    try:
        lock = filelock.FileLock(path, timeout=max(0.0, deadline - time.monotonic()))
        try:
            lock.acquire()
        except filelock.Timeout:
            raise _busy(catalog_dir, timeout_s) from None
        try:
            yield path
        finally:
            lock.release()
    finally:
        thread_lock.release()


def _busy(catalog_dir: str | os.PathLike[str], timeout_s: float) -> CatalogBusy:
    return CatalogBusy(
        str(catalog_dir),
        f"another stock write held the catalog lock for over {timeout_s:g} s",
        retry_after_s=5.0,
    )
