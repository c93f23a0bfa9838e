"""Read a catalog's tables for a write once no other program is writing them.

Other programs (a spreadsheet, an editor, a sync tool) save the tables without our lock, often
by truncating the file and writing it again, with pauses. A table counts as *settled* when

- it still bears the stamp (inode, size, mtime) and hash of our own last write, or
- its mtime is at least ``quiet_s`` seconds old, or it has kept one stamp for ``quiet_s``
  seconds of our own clock (a file whose mtime runs ahead of this machine's clock still
  settles).

:func:`read_settled` waits until every table has settled (up to a deadline, else
:class:`CatalogBusy`), then reads each one with its stamp and SHA-256. A table that changed
while being read is read again. :meth:`Snapshot.changed_file` tells, just before a rename,
whether any table differs from what was read.

Limit, stated plainly: a program that pauses longer than ``quiet_s`` in the middle of a save
looks finished; a half-written table read then is refused when it fails validation, but one
cut exactly at a line ending validates. Nothing can tell such a pause from a finished save
without that program's co-operation.
"""

from __future__ import annotations

import hashlib
import math
import os
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from tristock.stock.columns import KINDS
from tristock.stock.errors import CatalogBusy
from tristock.stock.journal import FileStamp
from tristock.stock.tables import TableData

OwnStamp = Callable[[str], tuple[FileStamp, str] | None]


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


@dataclass(frozen=True, slots=True)
class TableRead:
    """One table as read: its bytes (None: no such file; OSError: unreadable), stamp, hash."""

    path: Path
    data: TableData
    stamp: FileStamp | None
    sha: str | None


@dataclass(frozen=True, slots=True)
class Snapshot:
    """Every table of a catalog directory as read at one moment, by kind."""

    directory: Path
    tables: dict[str, TableRead]

    def contents(self) -> dict[str, TableData]:
        return {kind: t.data for kind, t in self.tables.items()}

    def changed_file(self) -> Path | None:
        """The first table that no longer has the stamp and hash it was read with, if any."""
        for table in self.tables.values():
            now = _read(table.path)
            if (now.stamp, now.sha) != (table.stamp, table.sha):
                return table.path
        return None


def _stamp(path: Path) -> FileStamp | None:
    try:
        return FileStamp.of(os.stat(path))
    except FileNotFoundError:
        return None


#: Reads of a table that keeps changing while being read, before the last one is kept (its
#: stamp then differs from the file's, so the check before the rename starts over).
_READ_TRIES = 20


def _read(path: Path) -> TableRead:
    """Read ``path`` with the stamp it had throughout the read (re-read if it changed)."""
    for _ in range(_READ_TRIES):
        try:
            with path.open("rb") as handle:
                before = FileStamp.of(os.fstat(handle.fileno()))
                data = handle.read()
                after = FileStamp.of(os.fstat(handle.fileno()))
        except FileNotFoundError:
            return TableRead(path, None, None, None)
        except OSError as exc:
            return TableRead(path, exc, None, None)
        if before == after:
            break
    return TableRead(path, data, before, sha256_hex(data))


def read_settled(
    directory: Path,
    own_stamp: OwnStamp,
    *,
    quiet_s: float,
    deadline: float,
    sleep: Callable[[float], None] = time.sleep,
) -> Snapshot:
    """Wait until every table of ``directory`` has settled, then read them all.

    ``own_stamp(file name)`` gives the stamp and hash of our last write of that table.
    ``deadline`` is on ``time.monotonic()``; a table still unsettled by then (or one that
    cannot settle before it) raises :class:`CatalogBusy` with a ``retry_after_s`` of at least
    ``quiet_s``.
    """
    paths = {kind: directory / f"{kind}.csv" for kind in KINDS}
    first_seen: dict[str, tuple[FileStamp, float]] = {}
    distrusted: set[str] = set()
    while True:
        wall, mono = time.time(), time.monotonic()
        waits: list[tuple[float, Path]] = []
        for kind, path in paths.items():
            stamp = _stamp(path)
            if stamp is None:
                continue
            own = own_stamp(path.name)
            if own is not None and own[0] == stamp and kind not in distrusted:
                continue
            seen = first_seen.get(kind)
            if seen is None or seen[0] != stamp:
                seen = first_seen[kind] = (stamp, mono)
            age = max(wall - stamp.mtime_ns / 1e9, mono - seen[1])
            if age < quiet_s:
                waits.append((quiet_s - age, path))
        if not waits:
            snapshot = Snapshot(directory, {kind: _read(p) for kind, p in paths.items()})
            suspects = [
                kind
                for kind, t in snapshot.tables.items()
                if (own := own_stamp(t.path.name)) is not None
                and own[0] == t.stamp
                and own[1] != t.sha
                and kind not in distrusted
            ]
            if not suspects:
                return snapshot
            distrusted.update(suspects)  # same stamp, other bytes: rewritten within one tick
            continue
        wait, path = max(waits)
        if mono + wait > deadline:
            raise CatalogBusy(
                str(path),
                f"is being written by another program (changed {quiet_s - wait:.1f} s ago; "
                f"a stock write waits until it has been unchanged for {quiet_s:g} s)",
                retry_after_s=float(max(1, math.ceil(quiet_s))),
            )
        sleep(wait)
