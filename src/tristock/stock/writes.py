"""Stock writes that lose nothing another program writes, and never write over a broken table.

Under the catalog's writer lock (:mod:`tristock.stock.locking`), :func:`update_stock`

1. settles the journal (:mod:`tristock.stock.journal`) and answers a repeated idempotency key
   with the first answer, changing nothing;
2. waits until every table is settled (no other program writing: :func:`read_settled`), then
   reads all of them with their stamps and hashes;
3. validates the whole catalog as read (a :class:`CatalogError` naming every ``file:line``
   refuses the write), finds the part, checks the caller's expected version, and applies the
   change to what was just read, never to a cached copy;
4. changes only the bytes of that part's stock field (CRLF, BOM, quoting and every other byte
   stay) and writes the table atomically (:func:`tristock.stock.atomicio.write_atomic`); just before
   the rename it checks that every table still has the stamp and hash it was read with, and
   starts over (up to ``attempts`` times) if one changed.

The stock stays a whole number in 0..:data:`STOCK_MAX`. A refused write changes no file.
"""

from __future__ import annotations

import dataclasses
import os
import threading
import time
from collections import OrderedDict
from collections.abc import Collection
from contextlib import suppress
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

from tristock.stock.atomicio import clean_stale_temps, write_atomic
from tristock.stock.columns import KINDS
from tristock.stock.comparators import Comparator
from tristock.stock.csvtext import is_skipped, line_content, physical_lines, split_fields
from tristock.stock.diodes import Diode
from tristock.stock.errors import (
    STOCK_MAX,
    CatalogBusy,
    CatalogWriteError,
    KeyReused,
    PreconditionFailed,
    StockError,
    UnknownPart,
)
from tristock.stock.journal import JOURNAL_NAME, KEY_LIFETIME_S, FileStamp, WriteJournal
from tristock.stock.locking import LOCK_TIMEOUT_S, catalog_lock
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.stock.snapshot import Snapshot, read_settled, sha256_hex
from tristock.stock.tables import Catalog, parse_catalog, part_version

#: Catalogs validated from exact table bytes, by (directory, SHA-256 of each table): the same
#: bytes always validate the same way, so a write after our own write need not parse again.
_VALIDATED: OrderedDict[tuple[str, tuple[str | None, ...]], Catalog] = OrderedDict()
_VALIDATED_SIZE: Final[int] = 8
_validated_lock = threading.Lock()

_PART_TYPES: Final[dict[str, type[Part]]] = {
    "resistors": Resistor,
    "capacitors": Capacitor,
    "opamps": OpAmp,
    "pots": Pot,
    "comparators": Comparator,
    "diodes": Diode,
}


@dataclass(frozen=True, slots=True)
class WritePolicy:
    """How patient a stock write is (seconds): ``quiet_s`` unchanged before a table counts as
    settled, ``max_wait_s`` for all tables to settle, ``lock_timeout_s`` for the lock;
    ``attempts`` reads when a table changes under the write; idempotency keys live
    ``key_lifetime_s``."""

    quiet_s: float = 2.0
    max_wait_s: float = 5.0
    lock_timeout_s: float = LOCK_TIMEOUT_S
    attempts: int = 3
    key_lifetime_s: float = KEY_LIFETIME_S


DEFAULT_POLICY: Final[WritePolicy] = WritePolicy()


@dataclass(frozen=True, slots=True)
class RequestKey:
    """An idempotency key and a fingerprint of the request it came with (any string that is
    equal exactly when two requests mean the same change)."""

    key: str
    fingerprint: str


@dataclass(frozen=True, slots=True)
class StockWrite:
    """A write's outcome: the part as it now is, its version tag, the stock before and after.

    ``replayed``: the answer of an earlier request with the same idempotency key (nothing was
    written now). ``catalog`` is the validated catalog as written and ``stamps`` the stamp of
    each table file it came from (in :data:`KINDS` order; None for a missing file); both are
    None for a replay.
    """

    kind: str
    part: Part
    old: int
    new: int
    version: str
    replayed: bool = False
    catalog: Catalog | None = None
    stamps: tuple[FileStamp | None, ...] | None = None

    def to_record(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "part": dataclasses.asdict(self.part),
            "old": self.old,
            "new": self.new,
            "version": self.version,
        }

    @classmethod
    def from_record(cls, record: dict[str, Any]) -> StockWrite:
        part = _PART_TYPES[record["kind"]](**record["part"])
        return cls(record["kind"], part, record["old"], record["new"], record["version"], True)


def _check_count(count: object, what: str) -> int:
    if isinstance(count, bool) or not isinstance(count, int):
        raise StockError(f"{what} must be a whole number, got {count!r}")
    return count


def update_stock(
    catalog_dir: str | os.PathLike[str],
    part_id: str,
    *,
    stock: int | None = None,
    delta: int | None = None,
    kind: str | None = None,
    expect_versions: Collection[str] | None = None,
    request_key: RequestKey | None = None,
    policy: WritePolicy = DEFAULT_POLICY,
) -> StockWrite:
    """Set (``stock``) or add to (``delta``) the pieces on hand of ``part_id``.

    ``kind`` restricts the id to one table; ``expect_versions`` (if given) must contain the
    part's current :func:`part_version` (else :class:`PreconditionFailed`); a ``request_key``
    already used within ``policy.key_lifetime_s`` returns that first outcome unchanged.
    Raises StockError subclasses for refused requests and CatalogError (CatalogBusy,
    CatalogWriteError, or the table's validation problems) when the write cannot be done.
    """
    if (stock is None) == (delta is None):
        raise StockError("give exactly one of stock or delta")
    if stock is not None:
        _check_count(stock, "stock count")
        if not 0 <= stock <= STOCK_MAX:
            raise StockError(f"stock count must be in 0..{STOCK_MAX}, got {stock}")
    if delta is not None:
        _check_count(delta, "stock change")
    directory = Path(catalog_dir)
    if not directory.is_dir():
        raise StockError(f"'{directory}' is not a catalog directory")
    try:
        with catalog_lock(directory, policy.lock_timeout_s):
            return _locked_update(
                directory, part_id, stock, delta, kind, expect_versions, request_key, policy
            )
    except OSError as err:
        raise CatalogWriteError(str(err.filename or directory), err) from err


def _locked_update(
    directory: Path,
    part_id: str,
    stock: int | None,
    delta: int | None,
    kind: str | None,
    expect_versions: Collection[str] | None,
    request_key: RequestKey | None,
    policy: WritePolicy,
) -> StockWrite:
    table_names = [f"{k}.csv" for k in KINDS]
    clean_stale_temps(directory, [*table_names, JOURNAL_NAME])
    journal = WriteJournal.load(directory)
    journal.settle(lambda name: _sha_of(directory / name))
    now = time.time()
    journal.compact(now, policy.key_lifetime_s)
    if request_key is not None:
        earlier = journal.find(request_key.key, now, policy.key_lifetime_s)
        if earlier is not None:
            if earlier.request != request_key.fingerprint:
                raise KeyReused("this Idempotency-Key was used for a different request")
            if earlier.outcome == "done":
                return StockWrite.from_record(earlier.answer)
            if earlier.outcome == "unknown":
                raise KeyReused(
                    "the outcome of the first request with this Idempotency-Key is unknown (its "
                    "writer stopped and the table changed since); check the stock, use a new key"
                )
    deadline = time.monotonic() + policy.max_wait_s
    for _ in range(policy.attempts):
        snapshot = read_settled(
            directory, journal.own_stamp, quiet_s=policy.quiet_s, deadline=deadline
        )
        catalog = _validated(snapshot)
        write = _apply(catalog, part_id, stock, delta, kind, expect_versions)
        done = _write_table(snapshot, catalog, write, journal, request_key)
        if done is not None:
            return done
    raise CatalogBusy(
        str(directory),
        f"the tables changed under the write {policy.attempts} times",
        retry_after_s=float(max(1.0, policy.quiet_s)),
    )


def _table_hashes(snapshot: Snapshot) -> tuple[str | None, ...]:
    return tuple(snapshot.tables[kind].sha for kind in KINDS)


def _remember(directory: Path, hashes: tuple[str | None, ...], catalog: Catalog) -> None:
    with _validated_lock:
        _VALIDATED[(str(directory), hashes)] = catalog
        while len(_VALIDATED) > _VALIDATED_SIZE:
            _VALIDATED.popitem(last=False)


def _validated(snapshot: Snapshot) -> Catalog:
    """The catalog as read (CatalogError if it does not validate), parsed at most once per
    exact content of the tables."""
    hashes = _table_hashes(snapshot)
    with _validated_lock:
        known = _VALIDATED.get((str(snapshot.directory), hashes))
    if known is not None:
        return known
    catalog = parse_catalog(snapshot.directory, snapshot.contents())
    _remember(snapshot.directory, hashes, catalog)
    return catalog


def _sha_of(path: Path) -> str | None:
    try:
        return sha256_hex(path.read_bytes())
    except OSError:
        return None


def _apply(
    catalog: Catalog,
    part_id: str,
    stock: int | None,
    delta: int | None,
    kind: str | None,
    expect_versions: Collection[str] | None,
) -> StockWrite:
    """The change applied to the part as just read (no file touched)."""
    if part_id not in catalog or (kind is not None and catalog.kind_of(part_id) != kind):
        where = f"in {kind}" if kind is not None else f"in catalog '{catalog.path}'"
        raise UnknownPart(f"no part with id {part_id!r} {where}")
    part = catalog.get(part_id)
    version = part_version(part)
    if expect_versions is not None and version not in expect_versions:
        raise PreconditionFailed(
            f"{part_id!r} has changed (its version is now {version})", current_version=version
        )
    old = part.stock
    if stock is not None:
        new = stock
    else:
        assert delta is not None
        new = old + delta
        if new < 0:
            raise StockError(f"cannot take {-delta} of {part_id!r}: only {old} on hand")
        if new > STOCK_MAX:
            raise StockError(
                f"cannot add {delta} to {part_id!r}: {old} on hand would exceed the limit of "
                f"{STOCK_MAX} pieces"
            )
    changed = dataclasses.replace(part, stock=new)
    return StockWrite(catalog.kind_of(part_id), changed, old, new, part_version(changed))


def _write_table(
    snapshot: Snapshot,
    catalog: Catalog,
    write: StockWrite,
    journal: WriteJournal,
    request_key: RequestKey | None,
) -> StockWrite | None:
    """Write the changed table; None if a table changed after it was read (start over)."""
    table = snapshot.tables[write.kind]
    assert isinstance(table.data, bytes) and table.sha is not None
    data = replace_stock_field(table.data, write.part.id, write.new, str(table.path))
    sha = sha256_hex(data)
    write_id = None
    if request_key is not None:
        write_id = journal.intend(
            request_key.key,
            request_key.fingerprint,
            table.path.name,
            table.sha,
            sha,
            write.to_record(),
        )

    def still_as_read(_: os.stat_result) -> None:
        changed = snapshot.changed_file()
        if changed is not None:
            raise _TableChanged(changed)

    stamp = table.stamp
    try:
        if data != table.data:
            stamp = FileStamp.of(write_atomic(table.path, data, before_replace=still_as_read))
        else:
            still_as_read(os.stat(table.path))
    except _TableChanged:
        if write_id is not None:
            journal.abort(write_id)
        return None
    except OSError as err:
        if write_id is not None:
            journal.abort(write_id)
        raise CatalogWriteError(str(table.path), err) from err
    with suppress(OSError):  # the table is written; a lost stamp costs a quiet wait, no more
        journal.finish(write_id, table.path.name, stamp, sha)
    stamps = tuple(stamp if kind == write.kind else snapshot.tables[kind].stamp for kind in KINDS)
    written = catalog.with_part(write.part)
    hashes = tuple(sha if kind == write.kind else snapshot.tables[kind].sha for kind in KINDS)
    _remember(snapshot.directory, hashes, written)
    return dataclasses.replace(write, catalog=written, stamps=stamps)


class _TableChanged(Exception):
    """A table changed between its read and the rename."""


def replace_stock_field(data: bytes, part_id: str, count: int, file: str) -> bytes:
    """``data`` (a validated table) with the stock field of ``part_id`` set to ``count``.

    Only that field's characters change: line endings, a byte-order mark, quoting, blanks
    and every other byte stay as they were.
    """
    text = data.decode("utf-8")
    lines = physical_lines(text)
    header: list[str] | None = None
    for index, physical in enumerate(lines):
        content = line_content(physical)
        if index == 0 and content.startswith("\ufeff"):
            content = " " + content[1:]  # one character for one: offsets stay right
        if is_skipped(content):
            continue
        fields = split_fields(content)
        if header is None:
            header = [f.text.strip().lower() for f in fields]
            continue
        if len(fields) == len(header) and fields[header.index("id")].text == part_id:
            cell = fields[header.index("stock")]
            lines[index] = physical[: cell.start] + str(count) + physical[cell.end :]
            return "".join(lines).encode("utf-8")
    raise UnknownPart(f"{file}: no row with id {part_id!r}")


def set_stock(
    catalog_dir: str | os.PathLike[str],
    part_id: str,
    count: int,
    *,
    policy: WritePolicy = DEFAULT_POLICY,
) -> int:
    """Set the pieces on hand of ``part_id`` to ``count`` (0..STOCK_MAX); returns the old
    count. Only the stock field's characters change; every other byte of the file stays."""
    return update_stock(catalog_dir, part_id, stock=count, policy=policy).old


def adjust_stock(
    catalog_dir: str | os.PathLike[str],
    part_id: str,
    delta: int,
    *,
    policy: WritePolicy = DEFAULT_POLICY,
) -> int:
    """Add ``delta`` pieces (negative to take) to ``part_id``'s stock; returns the new count.

    Refuses, leaving the file unchanged, if the stock would leave 0..STOCK_MAX.
    """
    return update_stock(catalog_dir, part_id, delta=delta, policy=policy).new
