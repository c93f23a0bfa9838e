"""The write journal beside a catalog: idempotency keys and the stamps of our own writes.

``.tristock-writes.jsonl`` holds one JSON object per line, appended under the writer lock:

- ``intent``: a keyed write about to rename its table: the key, a fingerprint of the request,
  the table's SHA-256 before and after, and the answer. Appended and ``fsync``\\ ed *before*
  the rename, so a process killed between the rename and its answer leaves the outcome on disk.
- ``done`` / ``aborted`` / ``unknown``: how an intent ended. ``done`` also records the stamp
  (inode, size, mtime in ns) and SHA-256 of the table we wrote, keyed or not: a table still
  bearing our last stamp was not touched by another program since, so it needs no quiet wait.
- An intent with no ending (the writer was killed) is settled by the next writer: the table's
  hash equals ``after`` -> done, ``before`` -> aborted, anything else -> unknown.

A torn last line (killed mid-append) is ignored. Keys live :data:`KEY_LIFETIME_S`; the file is
rewritten without expired records once it passes :data:`COMPACT_AFTER_LINES` lines.
"""

from __future__ import annotations

import json
import os
import time
import uuid
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final, Literal

from tristock.stock.atomicio import fsync_directory, write_atomic

JOURNAL_NAME: Final[str] = ".tristock-writes.jsonl"
KEY_LIFETIME_S: Final[float] = 24 * 3600.0
COMPACT_AFTER_LINES: Final[int] = 1000

Outcome = Literal["pending", "done", "aborted", "unknown"]


@dataclass(frozen=True, slots=True)
class FileStamp:
    """What ``stat`` says about a file's content: inode, size (bytes), mtime (ns)."""

    ino: int
    size: int
    mtime_ns: int

    @classmethod
    def of(cls, st: os.stat_result) -> FileStamp:
        return cls(st.st_ino, st.st_size, st.st_mtime_ns)


@dataclass(slots=True)
class KeyedWrite:
    """One keyed write: its request fingerprint, when it was made, its answer and outcome."""

    write_id: str
    key: str
    request: str
    at: float
    file: str
    before: str
    after: str
    answer: dict[str, Any]
    outcome: Outcome = "pending"


class WriteJournal:
    """The journal of one catalog directory, read whole (under the writer lock)."""

    def __init__(self, directory: Path) -> None:
        self.path = Path(directory) / JOURNAL_NAME
        self.keyed: dict[str, KeyedWrite] = {}
        self.stamps: dict[str, tuple[FileStamp, str]] = {}
        self.lines = 0
        self._torn = False

    @classmethod
    def load(cls, directory: Path) -> WriteJournal:
        """Read the journal (none yet is an empty one); OSError if it cannot be read."""
        journal = cls(directory)
        try:
            data = journal.path.read_bytes()
        except FileNotFoundError:
            return journal
        journal._torn = bool(data) and not data.endswith(b"\n")
        for raw in data.split(b"\n"):
            try:
                record = json.loads(raw)
            except ValueError:
                continue  # a torn last line, or not ours
            if isinstance(record, dict):
                journal._apply(record)
                journal.lines += 1
        return journal

    def _apply(self, record: dict[str, Any]) -> None:
        op = record.get("op")
        if op == "intent":
            write = KeyedWrite(
                str(record["id"]),
                str(record["key"]),
                str(record["request"]),
                float(record["at"]),
                str(record["file"]),
                str(record["before"]),
                str(record["after"]),
                dict(record["answer"]),
            )
            self.keyed[write.write_id] = write
        elif op in ("done", "aborted", "unknown"):
            write_id = record.get("id")
            if isinstance(write_id, str) and write_id in self.keyed:
                self.keyed[write_id].outcome = op
            stamp = record.get("stamp")
            if op == "done" and isinstance(stamp, list) and len(stamp) == 3:
                self.stamps[str(record["file"])] = (FileStamp(*map(int, stamp)), str(record["sha"]))

    # ---- reading

    def find(self, key: str, now: float, lifetime_s: float = KEY_LIFETIME_S) -> KeyedWrite | None:
        """The latest write made with ``key`` within ``lifetime_s`` seconds of ``now``."""
        found = [w for w in self.keyed.values() if w.key == key and now - w.at < lifetime_s]
        return max(found, key=lambda w: w.at) if found else None

    def own_stamp(self, file_name: str) -> tuple[FileStamp, str] | None:
        """The stamp and SHA-256 of the last table ``file_name`` that we wrote, if recorded."""
        return self.stamps.get(file_name)

    # ---- appending (under the writer lock)

    def settle(self, sha_of: Callable[[str], str | None]) -> None:
        """End every pending intent by comparing its table's current hash (``sha_of(file)``)
        with its before and after hashes."""
        for write in self.keyed.values():
            if write.outcome != "pending":
                continue
            sha = sha_of(write.file)
            outcome: Outcome = (
                "done" if sha == write.after else "aborted" if sha == write.before else "unknown"
            )
            self._append({"op": outcome, "id": write.write_id}, sync=True)
            write.outcome = outcome

    def intend(
        self,
        key: str,
        request: str,
        file: str,
        before: str,
        after: str,
        answer: dict[str, Any],
    ) -> str:
        """Record, durably, a keyed write about to happen; returns its id."""
        write = KeyedWrite(uuid.uuid4().hex, key, request, time.time(), file, before, after, answer)
        record = {
            "op": "intent",
            "id": write.write_id,
            "key": key,
            "request": request,
            "at": write.at,
            "file": file,
            "before": before,
            "after": after,
            "answer": answer,
        }
        self._append(record, sync=True)
        self.keyed[write.write_id] = write
        return write.write_id

    def finish(self, write_id: str | None, file: str, stamp: FileStamp | None, sha: str) -> None:
        """Record that a write ended well, with the stamp of the table it left (if it wrote).

        Not ``fsync``\\ ed: losing it in a power cut costs only a quiet wait, and a pending
        intent is settled by hash."""
        record: dict[str, Any] = {"op": "done", "id": write_id, "file": file, "sha": sha}
        if stamp is not None:
            record["stamp"] = [stamp.ino, stamp.size, stamp.mtime_ns]
            self.stamps[file] = (stamp, sha)
        self._append(record, sync=False)
        if write_id is not None and write_id in self.keyed:
            self.keyed[write_id].outcome = "done"

    def abort(self, write_id: str) -> None:
        """Record that an intended write did not happen."""
        self._append({"op": "aborted", "id": write_id}, sync=True)
        self.keyed[write_id].outcome = "aborted"

    def compact(self, now: float, lifetime_s: float = KEY_LIFETIME_S) -> None:
        """Rewrite the journal (atomically) without expired keys once it has grown long."""
        if self.lines < COMPACT_AFTER_LINES:
            return
        live = [w for w in self.keyed.values() if now - w.at < lifetime_s]
        records: list[dict[str, Any]] = []
        for w in live:
            records.append(
                {
                    "op": "intent",
                    "id": w.write_id,
                    "key": w.key,
                    "request": w.request,
                    "at": w.at,
                    "file": w.file,
                    "before": w.before,
                    "after": w.after,
                    "answer": w.answer,
                }
            )
            if w.outcome != "pending":
                records.append({"op": w.outcome, "id": w.write_id})
        for file, (stamp, sha) in self.stamps.items():
            stamp_list = [stamp.ino, stamp.size, stamp.mtime_ns]
            records.append(
                {"op": "done", "id": None, "file": file, "stamp": stamp_list, "sha": sha}
            )
        text = "".join(json.dumps(r, separators=(",", ":")) + "\n" for r in records)
        write_atomic(self.path, text.encode("utf-8"))
        self.keyed = {w.write_id: w for w in live}
        self.lines = len(records)
        self._torn = False

    def _append(self, record: dict[str, Any], *, sync: bool) -> None:
        line = json.dumps(record, separators=(",", ":")) + "\n"
        if self._torn:
            line = "\n" + line  # end a torn line first, so this record stands alone
        flags = os.O_WRONLY | os.O_APPEND | os.O_CREAT | getattr(os, "O_BINARY", 0)
        new_file = sync and not self.path.exists()
        fd = os.open(self.path, flags, 0o644)
        try:
            data = line.encode("utf-8")
            while data:
                data = data[os.write(fd, data) :]
            if sync:
                os.fsync(fd)
        finally:
            os.close(fd)
        if new_file:
            fsync_directory(self.path.parent)
        self._torn = False
        self.lines += 1
