"""Whole-file writes that readers see complete or not at all, and never leave debris.

:func:`write_atomic` writes a temporary file in the target's directory (so the rename stays on
one file system), flushes and ``fsync``s it, renames it over the target with ``os.replace``
(or links it, to refuse an existing target) and ``fsync``s the directory, so that after a crash
the target holds either the old bytes or the new ones (POSIX rename(2) semantics; common
practice for crash-safe files). Catalog stock writes, table generation and plots all use it.

Temporary files are named ``.<target name>.<8 hex digits>.tmp``; a process killed mid-write can
leave one, and :func:`clean_stale_temps` removes those older than a minute.
"""

from __future__ import annotations

import os
import re
import secrets
import time
from collections.abc import Callable, Iterable
from contextlib import suppress
from pathlib import Path
from typing import BinaryIO, Final

#: Permissions of a new file (an existing target keeps its own).
NEW_FILE_MODE: Final[int] = 0o644
#: A temporary file this old (seconds, by its mtime) belongs to no running write.
STALE_AFTER_S: Final[float] = 60.0
#: Random part of a temporary file's name: 8 characters, as this module and ``tempfile`` make.
_TOKEN: Final[str] = r"[A-Za-z0-9_]{8}"

Content = bytes | Callable[[BinaryIO], None]


def temp_name(target: Path) -> Path:
    """A fresh temporary path beside ``target``: ``.<name>.<8 hex digits>.tmp``."""
    return target.with_name(f".{target.name}.{secrets.token_hex(4)}.tmp")


def is_temp_of(name: str, target_name: str) -> bool:
    """Whether the file name ``name`` is one of our temporary files for ``target_name``."""
    return re.fullmatch(rf"\.{re.escape(target_name)}\.{_TOKEN}\.tmp", name) is not None


def write_atomic(
    path: str | os.PathLike[str],
    content: Content,
    *,
    overwrite: bool = True,
    before_replace: Callable[[os.stat_result], None] | None = None,
) -> os.stat_result:
    """Replace (or create) ``path`` with ``content`` so readers see the old file or the new one.

    ``content`` is the bytes, or a function that writes them to a binary stream (a plot's
    ``savefig``). ``before_replace`` is called with the finished temporary file's ``fstat``
    just before the rename; whatever it raises aborts the write. With ``overwrite=False`` an
    existing ``path`` is never touched (FileExistsError). On any failure the temporary file is
    removed, the old file is left as it was, and the error (OSError: ENOSPC, EROFS, EACCES, ...)
    propagates. Returns the ``fstat`` of the new file (its inode, size and mtime as written).
    """
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    tmp = temp_name(target)
    try:
        mode = os.stat(target).st_mode & 0o7777
    except FileNotFoundError:
        mode = NEW_FILE_MODE
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    fd = os.open(tmp, flags, 0o600)
    try:
        with os.fdopen(fd, "wb") as handle:
            if isinstance(content, bytes):
                handle.write(content)
            else:
                content(handle)
            handle.flush()
            os.fsync(handle.fileno())
            written = os.fstat(handle.fileno())
        os.chmod(tmp, mode)
        if before_replace is not None:
            before_replace(written)
        if overwrite:
            os.replace(tmp, target)
        else:
            try:
                os.link(tmp, target)  # fails if the target exists, atomically
            except FileExistsError:
                raise FileExistsError(
                    f"{target}: file exists (use overwrite to replace it)"
                ) from None
            os.unlink(tmp)
    except BaseException:
        with suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    fsync_directory(directory)
    return written


def fsync_directory(directory: Path) -> None:
    """Make a rename in ``directory`` durable (POSIX; Windows cannot open a directory)."""
    if os.name == "nt":
        return
    dir_fd = os.open(directory, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        os.fsync(dir_fd)
    finally:
        os.close(dir_fd)


def clean_stale_temps(
    directory: Path,
    target_names: Iterable[str],
    *,
    older_than_s: float = STALE_AFTER_S,
    now: float | None = None,
) -> list[Path]:
    """Remove our temporary files for ``target_names`` last modified over ``older_than_s``
    seconds ago; younger ones may belong to a write in progress and stay. Best effort: a file
    that cannot be listed or removed (read-only folder) is left. Returns what was removed."""
    names = tuple(target_names)
    cutoff = (time.time() if now is None else now) - older_than_s
    removed: list[Path] = []
    try:
        entries = list(os.scandir(directory))
    except OSError:
        return removed
    for entry in entries:
        if not entry.name.startswith(".") or not any(is_temp_of(entry.name, n) for n in names):
            continue
        try:
            if entry.stat(follow_symlinks=False).st_mtime < cutoff:
                os.unlink(entry.path)
                removed.append(Path(entry.path))
        except OSError:
            continue
    return removed
