"""Tables and catalogs: parse and validate the CSV part tables, all problems at once.

Empty lines and lines whose first non-blank character is ``#`` are skipped, but line numbers in
messages always count every physical line of the file. Loading is all-or-nothing: every problem
in every file is collected, then raised once as a :class:`CatalogError`.

:func:`parse_catalog` validates tables already read (the stock writer validates exactly the
bytes it is about to change); :func:`load_catalog` reads them from a directory, after removing
the temporary files of writes killed over a minute ago.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path

from tristock.stock.atomicio import clean_stale_temps
from tristock.stock.columns import (
    ALTERNATIVE_COLUMNS,
    COLUMNS,
    KINDS,
    OPTIONAL_COLUMNS,
    OPTIONAL_KINDS,
    CatalogError,
    CatalogIssue,
)
from tristock.stock.comparator_rows import build_comparator
from tristock.stock.comparators import Comparator
from tristock.stock.csvtext import (
    decode_table,
    is_skipped,
    line_content,
    physical_lines,
    split_fields,
)
from tristock.stock.diode_rows import build_diode
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.stock.rows import BUILDERS as BASIC_BUILDERS
from tristock.stock.rows import RowReader
from tristock.stock.settings import read_settings

#: Row builders of every table kind: the basic tables' and the diode table's.
BUILDERS = {**BASIC_BUILDERS, "diodes": build_diode}

#: Row builders of every table kind.
ROW_BUILDERS: dict[str, Callable[[RowReader], Part | None]] = {
    **BUILDERS,
    "comparators": build_comparator,
}

#: What a table file held when read: its bytes, None when it does not exist, or the error.
TableData = bytes | OSError | None


@dataclass(frozen=True)
class Catalog:
    """The parts of one stock room, by kind; ids are unique across all four kinds."""

    path: Path
    resistors: tuple[Resistor, ...]
    capacitors: tuple[Capacitor, ...]
    opamps: tuple[OpAmp, ...]
    pots: tuple[Pot, ...] = ()
    comparators: tuple[Comparator, ...] = ()
    diodes: tuple[Diode, ...] = ()
    _index: dict[str, tuple[str, Part]] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        index: dict[str, tuple[str, Part]] = {}
        groups: tuple[tuple[str, tuple[Part, ...]], ...] = (
            ("resistors", self.resistors),
            ("capacitors", self.capacitors),
            ("opamps", self.opamps),
            ("pots", self.pots),
            ("comparators", self.comparators),
            ("diodes", self.diodes),
        )
        for kind, parts in groups:
            for part in parts:
                if part.id in index:
                    raise ValueError(f"duplicate part id {part.id!r} in catalog {self.path}")
                index[part.id] = (kind, part)
        object.__setattr__(self, "_index", index)

    def get(self, part_id: str) -> Part:
        """The part with stock code ``part_id``; KeyError naming the id and catalog if absent."""
        try:
            return self._index[part_id][1]
        except KeyError:
            raise KeyError(f"no part with id {part_id!r} in catalog '{self.path}'") from None

    def kind_of(self, part_id: str) -> str:
        """Which table holds ``part_id``: "resistors", "capacitors", "opamps", "pots" or
        "comparators", "diodes"."""
        try:
            return self._index[part_id][0]
        except KeyError:
            raise KeyError(f"no part with id {part_id!r} in catalog '{self.path}'") from None

    def with_part(self, part: Part) -> Catalog:
        """This catalog with the part of the same id replaced by ``part`` (same kind)."""
        kind = self.kind_of(part.id)
        groups = {k: getattr(self, k) for k in KINDS}
        groups[kind] = tuple(part if p.id == part.id else p for p in groups[kind])
        return Catalog(self.path, **groups)

    def __contains__(self, part_id: object) -> bool:
        return isinstance(part_id, str) and part_id in self._index

    def __iter__(self) -> Iterator[Part]:
        return (part for _, part in self._index.values())

    def __len__(self) -> int:
        return len(self._index)

    def __repr__(self) -> str:
        return (
            f"Catalog('{self.path}': {len(self.resistors)} resistors, "
            f"{len(self.capacitors)} capacitors, {len(self.opamps)} op amps, "
            f"{len(self.pots)} pots"
            + (f", {len(self.comparators)} comparators" if self.comparators else "")
            + f"{self._diodes_note()})"
        )

    def _diodes_note(self) -> str:
        return f", {len(self.diodes)} diodes" if self.diodes else ""


@dataclass(frozen=True, slots=True)
class _RowResult:
    """A data row: its line, its id cell and the part it made (None if any cell was wrong)."""

    line: int
    part_id: str
    part: Part | None


def _read_table(kind: str, text: str, file: str, issues: list[CatalogIssue]) -> list[_RowResult]:
    """Parse one table's text; append its problems to ``issues``; return every data row."""
    header: list[str] | None = None
    header_line = 0
    rows: list[_RowResult] = []
    for number, physical in enumerate(physical_lines(text), start=1):
        content = line_content(physical)
        if is_skipped(content):
            continue
        try:
            fields = [f.text for f in split_fields(content)]
        except ValueError as exc:
            issues.append(CatalogIssue(file, number, None, str(exc)))
            if header is None:
                return []
            continue
        if header is None:
            header_line = number
            header = [name.strip().lower() for name in fields]
            if not _check_header(kind, header, file, number, issues):
                return []
            continue
        if not any(fields):
            continue  # a spreadsheet's empty row: only commas
        if len(fields) != len(header):
            issues.append(
                CatalogIssue(
                    file,
                    number,
                    None,
                    f"expected {len(header)} fields as in the header (line {header_line}), "
                    f"found {len(fields)}",
                )
            )
            continue
        cells = dict(zip(header, fields, strict=True))
        part = ROW_BUILDERS[kind](RowReader(file, number, cells, issues))
        rows.append(_RowResult(number, cells["id"], part))
    if header is None:
        expected = ", ".join(COLUMNS[kind])
        issues.append(CatalogIssue(file, None, None, f"no header line (expected: {expected})"))
    return rows


def _check_header(
    kind: str, header: list[str], file: str, line: int, issues: list[CatalogIssue]
) -> bool:
    """Every required column once (or an alternative standing in for it), nothing else;
    False (after recording why) otherwise."""
    expected = COLUMNS[kind]
    alternatives = ALTERNATIVE_COLUMNS.get(kind, {})
    allowed = (*expected, *alternatives, *OPTIONAL_COLUMNS.get(kind, ()))
    before = len(issues)
    seen: set[str] = set()
    for name in header:
        label = name or "''"
        if name in seen:
            issues.append(CatalogIssue(file, line, label, "column appears twice"))
        elif name not in allowed:
            issues.append(
                CatalogIssue(
                    file,
                    line,
                    label,
                    f"unknown column (columns of {kind}.csv: {', '.join(allowed)})",
                )
            )
        seen.add(name)
    for name in expected:
        stand_ins = [alt for alt, target in alternatives.items() if target == name]
        if name not in seen and not any(alt in seen for alt in stand_ins):
            also = "".join(f" (or {alt})" for alt in stand_ins)
            issues.append(CatalogIssue(file, line, name, f"required column is missing{also}"))
    return len(issues) == before


def _check_unique_ids(
    tables: list[tuple[str, list[_RowResult]]], issues: list[CatalogIssue]
) -> None:
    """Report each repeat of an id at its line, naming where the id first appeared."""
    first: dict[str, str] = {}
    for file, rows in tables:
        for row in rows:
            if not row.part_id:
                continue
            if row.part_id in first:
                issues.append(
                    CatalogIssue(
                        file,
                        row.line,
                        "id",
                        f"duplicate id {row.part_id!r} (first at {first[row.part_id]})",
                    )
                )
            else:
                first[row.part_id] = f"{file}:{row.line}"


def _sorted_issues(issues: list[CatalogIssue], files: list[str]) -> list[CatalogIssue]:
    order = {file: i for i, file in enumerate(files)}
    return sorted(issues, key=lambda e: (order.get(e.file, -1), e.line or 0))


def read_table(kind: str, text: str, file: str = "<table>") -> list[Part]:
    """Parse and validate the text of one table of ``kind`` ("resistors", ...).

    Checks everything :func:`load_catalog` checks within one file, ids included. Raises
    CatalogError with every problem; ``file`` names the table in the messages.
    """
    if kind not in COLUMNS:
        raise ValueError(f"unknown table kind {kind!r} (expected one of {', '.join(KINDS)})")
    issues: list[CatalogIssue] = []
    rows = _read_table(kind, text, file, issues)
    _check_unique_ids([(file, rows)], issues)
    if issues:
        raise CatalogError(_sorted_issues(issues, [file]))
    return [row.part for row in rows if row.part is not None]


def table_files(directory: Path) -> list[Path]:
    """The table file of each kind in ``directory``, in :data:`KINDS` order."""
    return [directory / f"{kind}.csv" for kind in KINDS]


def parse_catalog(directory: Path, contents: Mapping[str, TableData]) -> Catalog:
    """Validate the tables of ``directory`` given their contents (by kind); CatalogError
    lists every problem.

    Ids must be unique across all tables; a row with other wrong cells still claims its id, so
    a repeat is reported alongside the other errors. File names in messages are ``directory``
    joined with the table's name, relative if ``directory`` was.
    """
    issues: list[CatalogIssue] = []
    tables: dict[str, list[_RowResult]] = {kind: [] for kind in KINDS}
    files = [str(f) for f in table_files(directory)]
    for kind, file in zip(KINDS, files, strict=True):
        data = contents.get(kind)
        if data is None:
            if kind not in OPTIONAL_KINDS:
                issues.append(CatalogIssue(file, None, None, "required file is missing"))
            continue
        if isinstance(data, OSError):
            issues.append(CatalogIssue(file, None, None, f"cannot read: {data.strerror}"))
            continue
        try:
            text = decode_table(data)
        except UnicodeDecodeError as exc:
            issues.append(CatalogIssue(file, None, None, f"not UTF-8 text (byte {exc.start})"))
            continue
        tables[kind] = _read_table(kind, text, file, issues)
    _check_unique_ids(list(zip(files, tables.values(), strict=True)), issues)
    if issues:
        raise CatalogError(_sorted_issues(issues, files))

    def parts(kind: str) -> list[Part]:
        return [row.part for row in tables[kind] if row.part is not None]

    return Catalog(
        directory,
        tuple(p for p in parts("resistors") if isinstance(p, Resistor)),
        tuple(p for p in parts("capacitors") if isinstance(p, Capacitor)),
        tuple(p for p in parts("opamps") if isinstance(p, OpAmp)),
        tuple(p for p in parts("pots") if isinstance(p, Pot)),
        tuple(p for p in parts("comparators") if isinstance(p, Comparator)),
        tuple(p for p in parts("diodes") if isinstance(p, Diode)),
    )


def read_table_file(path: Path) -> TableData:
    """A table file's bytes; None if it does not exist; the OSError if it cannot be read."""
    try:
        return path.read_bytes()
    except FileNotFoundError:
        return None
    except OSError as exc:
        return exc


def load_catalog(path: str | os.PathLike[str]) -> Catalog:
    """Load and validate the catalog directory ``path`` (its tables and the optional
    ``catalog.toml``, ``stock.settings``); CatalogError lists every problem.

    First removes our temporary files older than a minute (left by a killed write; best
    effort, nothing happens in a read-only folder).
    """
    directory = Path(path)
    if not directory.is_dir():
        raise CatalogError([CatalogIssue(str(directory), None, None, "not a catalog directory")])
    files = table_files(directory)
    clean_stale_temps(directory, [f.name for f in files])
    issues: list[CatalogIssue] = []
    try:
        read_settings(directory)  # catalog.toml beside the tables, checked with them
    except CatalogError as err:
        issues = err.errors
    try:
        catalog = parse_catalog(
            directory, {kind: read_table_file(f) for kind, f in zip(KINDS, files, strict=True)}
        )
    except CatalogError as err:
        raise CatalogError(issues + err.errors) from None
    if issues:
        raise CatalogError(issues)
    return catalog


def part_version(part: Part) -> str:
    """A strong version tag of a part as parsed: 20 hex digits of SHA-256 over its kind and
    fields. Equal tags mean equal rows as the API shows them (whatever their spelling in the
    file); any change of any field changes the tag."""
    fields = {"type": type(part).__name__, **dataclasses.asdict(part)}
    text = json.dumps(fields, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:20]
