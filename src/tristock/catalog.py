"""Load, validate and update the CSV part tables of a stock room.

A catalog is a directory with ``resistors.csv``, ``capacitors.csv``, ``opamps.csv`` and,
optionally, ``pots.csv``. Each file has one header row and one part per row; columns may come in
any order. Empty lines and lines whose first non-blank character is ``#`` are skipped, but line
numbers in messages always count every physical line of the file. Cells may be quoted
(``"0603"``, a doubled quote inside stands for one) but may not span lines; blanks around a cell
are ignored; a UTF-8 byte-order mark is allowed.

Loading is all-or-nothing: every problem in every file is collected, then raised once as a
:class:`CatalogError` whose issues print as ``file:line: column: message``.

Stock updates change only the bytes of one stock field, write a temporary file in the same
directory, ``fsync`` it, ``os.replace`` it over the table and ``fsync`` the directory, all under an
exclusive ``flock`` on ``.tristock.lock`` in the catalog directory.
"""

from __future__ import annotations

import fcntl
import math
import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from dataclasses import dataclass, field
from pathlib import Path
from typing import Final

from tristock import eseries, units
from tristock.parts import (
    CLASS_I_DIELECTRICS,
    CLASS_II_DIELECTRICS,
    FILM_DIELECTRICS,
    KNOWN_DIELECTRICS,
    Capacitor,
    OpAmp,
    Part,
    Pot,
    PotKind,
    Resistor,
    delay_from_delay_to_mid,
)

#: Column sets of each table, in the order the generator writes them.
COLUMNS: Final[dict[str, tuple[str, ...]]] = {
    "resistors": (
        "id",
        "value_ohm",
        "tolerance_pct",
        "tempco_ppm",
        "series",
        "power_w",
        "package",
        "unit_cost",
        "stock",
    ),
    "capacitors": (
        "id",
        "value_f",
        "dielectric",
        "tolerance_pct",
        "tempco_ppm",
        "temp_band_pct",
        "voltage_v",
        "package",
        "unit_cost",
        "stock",
    ),
    "opamps": (
        "id",
        "channels",
        "supply_min_v",
        "supply_max_v",
        "swing_pos_v",
        "swing_neg_v",
        "slew_v_per_us",
        "gbw_hz",
        "delay_s",
        "offset_v",
        "bias_a",
        "output_a",
        "unit_cost",
        "stock",
    ),
    "pots": ("id", "value_ohm", "tolerance_pct", "tempco_ppm", "kind", "unit_cost", "stock"),
}

#: Columns a table may have besides COLUMNS; each stands in for the required column it maps
#: to (a row gives one of the two): opamps.csv may give delay_to_mid_s instead of delay_s.
ALTERNATIVE_COLUMNS: Final[dict[str, dict[str, str]]] = {
    "opamps": {"delay_to_mid_s": "delay_s"},
}

#: Table kinds in load order; the file of a kind is ``<kind>.csv``.
KINDS: Final[tuple[str, ...]] = ("resistors", "capacitors", "opamps", "pots")
OPTIONAL_KINDS: Final[frozenset[str]] = frozenset({"pots"})
LOCK_NAME: Final[str] = ".tristock.lock"

#: Tolerance range accepted for resistors, capacitors and pots: (0, 50] %.
TOLERANCE_MAX_PCT: Final[float] = 50.0
POT_KINDS: Final[tuple[PotKind, ...]] = ("trimmer", "panel")


@dataclass(frozen=True, slots=True)
class CatalogIssue:
    """One problem in a table: prints as ``file:line: column: message``.

    ``line`` is None for a problem with a whole file (missing, unreadable); ``column`` is None
    for a problem with a whole row (wrong number of fields, bad quoting).
    """

    file: str
    line: int | None
    column: str | None
    message: str

    def __str__(self) -> str:
        where = self.file if self.line is None else f"{self.file}:{self.line}"
        if self.column is None:
            return f"{where}: {self.message}"
        return f"{where}: {self.column}: {self.message}"


class CatalogError(ValueError):
    """The catalog did not load; ``errors`` lists every problem found, in file and line order."""

    def __init__(self, errors: list[CatalogIssue]) -> None:
        self.errors = list(errors)
        count = len(self.errors)
        head = f"{count} problem{'s' if count != 1 else ''} in the catalog"
        super().__init__("\n".join([head, *(str(e) for e in self.errors)]))


class StockError(ValueError):
    """A stock update was refused (unknown id, bad count, or the stock would go below zero)."""


# --------------------------------------------------------------------------------------------
# The catalog


@dataclass(frozen=True)
class Catalog:
    """The parts of one stock room, by kind; ids are unique across all four kinds."""

    path: Path
    resistors: tuple[Resistor, ...]
    capacitors: tuple[Capacitor, ...]
    opamps: tuple[OpAmp, ...]
    pots: tuple[Pot, ...] = ()
    _index: dict[str, tuple[str, Part]] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        index: dict[str, tuple[str, Part]] = {}
        groups: tuple[tuple[str, tuple[Part, ...]], ...] = (
            ("resistors", self.resistors),
            ("capacitors", self.capacitors),
            ("opamps", self.opamps),
            ("pots", self.pots),
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
        """Which table holds ``part_id``: "resistors", "capacitors", "opamps" or "pots"."""
        try:
            return self._index[part_id][0]
        except KeyError:
            raise KeyError(f"no part with id {part_id!r} in catalog '{self.path}'") from None

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
            f"{len(self.pots)} pots)"
        )


# --------------------------------------------------------------------------------------------
# Low-level CSV: fields with their positions, so a writer can change one field in place


@dataclass(frozen=True, slots=True)
class _Field:
    """One CSV field: its text (unquoted, stripped) and the span of that text in the line."""

    text: str
    start: int
    end: int


def _split_fields(line: str) -> list[_Field]:
    """Split one CSV line (without its line ending) into fields.

    Fields are separated by commas; a field may be enclosed in double quotes (a doubled quote
    inside stands for one) with blanks around the quotes. Blanks around an unquoted field are
    not part of it. Raises ValueError on bad quoting.
    """
    fields: list[_Field] = []
    i, n = 0, len(line)
    while True:
        while i < n and line[i] in " \t":
            i += 1
        if i < n and line[i] == '"':
            start = i + 1
            j = start
            chars: list[str] = []
            while True:
                if j >= n:
                    raise ValueError(f"unterminated quote starting at column {start}")
                if line[j] == '"':
                    if j + 1 < n and line[j + 1] == '"':
                        chars.append('"')
                        j += 2
                        continue
                    break
                chars.append(line[j])
                j += 1
            fields.append(_Field("".join(chars), start, j))
            i = j + 1
            while i < n and line[i] in " \t":
                i += 1
            if i < n and line[i] != ",":
                raise ValueError(f"text after a closing quote at column {i + 1}")
        else:
            comma = line.find(",", i)
            stop = n if comma < 0 else comma
            raw = line[i:stop]
            if '"' in raw:
                raise ValueError(f"stray quote in unquoted field at column {i + 1}")
            text = raw.rstrip(" \t")
            fields.append(_Field(text, i, i + len(text)))
            i = stop
        if i >= n:
            return fields
        i += 1  # past the comma
        if i >= n:
            fields.append(_Field("", i, i))
            return fields


def _physical_lines(text: str) -> list[str]:
    """The file's lines split on LF only, each keeping its terminator (CRLF or LF or none)."""
    parts = text.split("\n")
    lines = [p + "\n" for p in parts[:-1]]
    if parts[-1]:
        lines.append(parts[-1])
    return lines


def _content(line: str) -> str:
    """A physical line without its LF or CRLF ending."""
    if line.endswith("\n"):
        line = line[:-1]
    if line.endswith("\r"):
        line = line[:-1]
    return line


def _is_skipped(content: str) -> bool:
    """Blank lines and ``#`` comment lines carry no row."""
    stripped = content.strip()
    return not stripped or stripped.startswith("#")


def _decode(data: bytes) -> str:
    """UTF-8 text without a leading byte-order mark; UnicodeDecodeError if not UTF-8."""
    text = data.decode("utf-8")
    return text[1:] if text.startswith("\ufeff") else text


# --------------------------------------------------------------------------------------------
# Number parsing shared by every column


def parse_number(text: str) -> float:
    """A finite number from a table cell: plain, SI prefix (4.7k) or IEC 60062 code (4k7).

    A leading sign is allowed ("-200"); columns that must be positive check that themselves.
    Raises ValueError quoting the text.
    """
    return units.parse_value(text, allow_negative=True)


def _show(value: float) -> str:
    return f"{value:g}"


class _Row:
    """Reads the typed cells of one row, recording an issue for each cell that is wrong.

    Accessors return a placeholder after recording an issue so that every cell of a row is
    checked; ``ok`` tells whether the row may become a part.
    """

    def __init__(
        self, file: str, line: int, cells: dict[str, str], issues: list[CatalogIssue]
    ) -> None:
        self.file = file
        self.line = line
        self.cells = cells
        self.issues = issues
        self._first_issue = len(issues)

    @property
    def ok(self) -> bool:
        return len(self.issues) == self._first_issue

    def error(self, column: str, message: str) -> None:
        self.issues.append(CatalogIssue(self.file, self.line, column, message))

    def raw(self, column: str) -> str:
        return self.cells.get(column, "")

    def text(self, column: str) -> str:
        value = self.raw(column)
        if not value:
            self.error(column, "is empty")
        return value

    def number(self, column: str, check: Callable[[float], str | None] | None = None) -> float:
        value = self.optional_number(column, check)
        if value is None:
            if not self.raw(column):
                self.error(column, "is empty")
            return math.nan
        return value

    def optional_number(
        self, column: str, check: Callable[[float], str | None] | None = None
    ) -> float | None:
        """The cell's number, or None when blank (or wrong, after recording why)."""
        text = self.raw(column)
        if not text:
            return None
        try:
            value = parse_number(text)
        except ValueError as exc:
            self.error(column, str(exc))
            return None
        problem = check(value) if check else None
        if problem:
            self.error(column, problem)
            return None
        return value

    def count(self, column: str, minimum: int) -> int:
        """A whole number >= ``minimum`` (stock, channels)."""
        value = self.number(column)
        if math.isnan(value):
            return 0
        if not value.is_integer():
            self.error(column, f"must be a whole number, got {_show(value)}")
            return 0
        if value < minimum:
            self.error(column, f"must be >= {minimum}, got {_show(value)}")
            return 0
        return int(value)


def _positive(value: float) -> str | None:
    return None if value > 0 else f"must be > 0, got {_show(value)}"


def _non_negative(value: float) -> str | None:
    return None if value >= 0 else f"must be >= 0, got {_show(value)}"


def _tolerance(value: float) -> str | None:
    if 0 < value <= TOLERANCE_MAX_PCT:
        return None
    return f"must be in (0, {_show(TOLERANCE_MAX_PCT)}] %, got {_show(value)}"


def _check_id(row: _Row) -> str:
    part_id = row.text("id")
    if part_id and any(ch.isspace() for ch in part_id):
        row.error("id", f"{part_id!r} contains blanks")
    return part_id


# --------------------------------------------------------------------------------------------
# One builder per kind: cells -> part (or issues)


def _build_resistor(row: _Row) -> Resistor | None:
    part_id = _check_id(row)
    value = row.number("value_ohm", _positive)
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.number("tempco_ppm")
    series: str | None = None
    series_text = row.raw("series")
    if series_text:
        try:
            series = eseries.parse_series(series_text)
        except ValueError as exc:
            row.error("series", str(exc))
    if series is not None and not math.isnan(value) and not eseries.is_member(series, value):
        row.error("value_ohm", f"{row.raw('value_ohm')!r} is not an {series} value")
    power = row.number("power_w", _positive)
    package = row.text("package")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Resistor(part_id, value, tolerance, tempco, series, power, package, cost, stock)


def _build_capacitor(row: _Row) -> Capacitor | None:
    part_id = _check_id(row)
    value = row.number("value_f", _positive)
    dielectric = row.text("dielectric").upper()
    if dielectric and dielectric not in KNOWN_DIELECTRICS:
        known = ", ".join(sorted(KNOWN_DIELECTRICS))
        row.error("dielectric", f"unknown dielectric {row.raw('dielectric')!r} (known: {known})")
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.optional_number("tempco_ppm")
    band = row.optional_number("temp_band_pct", _non_negative)
    if dielectric in CLASS_I_DIELECTRICS | FILM_DIELECTRICS and not row.raw("tempco_ppm"):
        row.error("tempco_ppm", f"is required for {dielectric} (class I and film dielectrics)")
    if dielectric in CLASS_II_DIELECTRICS and not row.raw("temp_band_pct"):
        row.error("temp_band_pct", f"is required for {dielectric} (class II dielectric)")
    voltage = row.number("voltage_v", _positive)
    package = row.text("package")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Capacitor(
        part_id, value, dielectric, tolerance, tempco, band, voltage, package, cost, stock
    )


def _build_opamp(row: _Row) -> OpAmp | None:
    part_id = _check_id(row)
    channels = row.count("channels", 1)
    supply_min = row.number("supply_min_v", _positive)
    supply_max = row.number("supply_max_v", _positive)
    if supply_min >= supply_max:  # False when either is NaN (already reported)
        row.error(
            "supply_min_v",
            f"must be less than supply_max_v ({_show(supply_min)} >= {_show(supply_max)})",
        )
    swing_pos = row.number("swing_pos_v", _non_negative)
    swing_neg = row.number("swing_neg_v", _non_negative)
    if swing_pos + swing_neg >= supply_max:
        row.error(
            "swing_pos_v",
            f"swing_pos_v + swing_neg_v ({_show(swing_pos + swing_neg)} V) leaves no output "
            f"range within supply_max_v ({_show(supply_max)} V)",
        )
    slew = row.number("slew_v_per_us", _positive)
    gbw = row.number("gbw_hz", _positive)
    delay, delay_to_mid = _opamp_delay(row, slew, supply_max - swing_pos - swing_neg)
    offset = row.number("offset_v")
    bias = row.number("bias_a")
    output = row.number("output_a", _positive)
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return OpAmp(
        part_id,
        channels,
        supply_min,
        supply_max,
        swing_pos,
        swing_neg,
        slew,
        gbw,
        delay,
        offset,
        bias,
        output,
        cost,
        stock,
        delay_to_mid,
    )


def _opamp_delay(row: _Row, slew_v_per_us: float, step_v: float) -> tuple[float, float | None]:
    """(delay_s, delay_to_mid_s or None) of an op-amp row: one of the two columns, never both;
    delay_to_mid_s is converted with ``parts.delay_from_delay_to_mid`` at the part's full
    output step (``OpAmp.full_step_v``)."""
    given = [name for name in ("delay_s", "delay_to_mid_s") if row.raw(name)]
    if len(given) == 2:
        row.error("delay_to_mid_s", "give delay_s or delay_to_mid_s, not both")
        return math.nan, None
    if not given and "delay_to_mid_s" in row.cells:
        row.error("delay_s", "is empty, and so is delay_to_mid_s: give one of them")
        return math.nan, None
    if given != ["delay_to_mid_s"]:
        return row.number("delay_s", _non_negative), None
    mid = row.number("delay_to_mid_s", _non_negative)
    if math.isnan(mid) or math.isnan(slew_v_per_us) or math.isnan(step_v):
        return math.nan, None
    slewing = step_v / (2.0 * slew_v_per_us * 1e6)
    delay = delay_from_delay_to_mid(mid, step_v, slew_v_per_us * 1e6)
    if delay < 0.0:
        row.error(
            "delay_to_mid_s",
            f"{_show(mid)} s is less than the {_show(slewing)} s the output takes to slew half "
            f"its {_show(step_v)} V step at {_show(slew_v_per_us)} V/µs",
        )
        return math.nan, None
    return delay, mid


def _build_pot(row: _Row) -> Pot | None:
    part_id = _check_id(row)
    value = row.number("value_ohm", _positive)
    tolerance = row.number("tolerance_pct", _tolerance)
    tempco = row.number("tempco_ppm")
    kind_text = row.text("kind").lower()
    kind: PotKind = "trimmer"
    if kind_text == "panel":
        kind = "panel"
    elif kind_text and kind_text != "trimmer":
        row.error("kind", f"must be trimmer or panel, got {row.raw('kind')!r}")
    cost = row.number("unit_cost", _non_negative)
    stock = row.count("stock", 0)
    if not row.ok:
        return None
    return Pot(part_id, value, tolerance, tempco, kind, cost, stock)


_BUILDERS: Final[dict[str, Callable[[_Row], Part | None]]] = {
    "resistors": _build_resistor,
    "capacitors": _build_capacitor,
    "opamps": _build_opamp,
    "pots": _build_pot,
}


# --------------------------------------------------------------------------------------------
# Tables and catalogs


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
    for number, physical in enumerate(_physical_lines(text), start=1):
        content = _content(physical)
        if _is_skipped(content):
            continue
        try:
            fields = [f.text for f in _split_fields(content)]
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
        part = _BUILDERS[kind](_Row(file, number, cells, issues))
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
    allowed = (*expected, *alternatives)
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


def load_catalog(path: str | os.PathLike[str]) -> Catalog:
    """Load and validate the catalog directory ``path``; CatalogError lists every problem.

    Ids must be unique across all tables; a row with other wrong cells still claims its id, so
    a repeat is reported alongside the other errors. File names in messages are ``path``
    joined with the table's name, relative if ``path`` was.
    """
    directory = Path(path)
    if not directory.is_dir():
        raise CatalogError([CatalogIssue(str(directory), None, None, "not a catalog directory")])
    issues: list[CatalogIssue] = []
    tables: dict[str, list[_RowResult]] = {kind: [] for kind in KINDS}
    files = [str(directory / f"{kind}.csv") for kind in KINDS]
    for kind, file in zip(KINDS, files, strict=True):
        try:
            text = _decode(Path(file).read_bytes())
        except FileNotFoundError:
            if kind not in OPTIONAL_KINDS:
                issues.append(CatalogIssue(file, None, None, "required file is missing"))
            continue
        except UnicodeDecodeError as exc:
            issues.append(CatalogIssue(file, None, None, f"not UTF-8 text (byte {exc.start})"))
            continue
        except OSError as exc:
            issues.append(CatalogIssue(file, None, None, f"cannot read: {exc.strerror}"))
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
    )


# --------------------------------------------------------------------------------------------
# Atomic, serialised stock updates


def write_atomic(path: str | os.PathLike[str], data: bytes, *, overwrite: bool = True) -> None:
    """Replace (or create) ``path`` with ``data`` so readers see the old or the new file, never
    a mix: temporary file in the same directory, flush + fsync, rename, fsync the directory.

    With ``overwrite=False`` an existing file is never touched (FileExistsError). On any failure
    the temporary file is removed and the old file is left as it was.
    """
    target = Path(path)
    directory = target.parent
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        try:
            mode = os.stat(target).st_mode & 0o7777
        except FileNotFoundError:
            mode = 0o644
        os.chmod(tmp_name, mode)
        if overwrite:
            os.replace(tmp_name, target)
        else:
            try:
                os.link(tmp_name, target)  # fails if the target exists, atomically
            except FileExistsError:
                raise FileExistsError(
                    f"{target}: file exists (use overwrite to replace it)"
                ) from None
            os.unlink(tmp_name)
    except BaseException:
        with suppress(FileNotFoundError):
            os.unlink(tmp_name)
        raise
    _fsync_directory(directory)


def _fsync_directory(directory: Path) -> None:
    dir_fd = os.open(directory, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        os.fsync(dir_fd)
    finally:
        os.close(dir_fd)


@contextmanager
def catalog_lock(catalog_dir: str | os.PathLike[str]) -> Iterator[None]:
    """Hold the catalog's exclusive writer lock (``flock`` on ``.tristock.lock``)."""
    fd = os.open(Path(catalog_dir) / LOCK_NAME, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fd, fcntl.LOCK_UN)
    finally:
        os.close(fd)


def _check_count(count: object, what: str) -> int:
    if isinstance(count, bool) or not isinstance(count, int):
        raise StockError(f"{what} must be a whole number, got {count!r}")
    return count


@dataclass(frozen=True, slots=True)
class _StockCell:
    """Where one part's stock field is: file, line index, and the field's span in the line."""

    file: Path
    text: str
    lines: list[str]
    index: int
    field: _Field


def _find_stock_cell(directory: Path, part_id: str) -> _StockCell:
    found: list[_StockCell] = []
    for kind in KINDS:
        file = directory / f"{kind}.csv"
        try:
            raw = file.read_bytes()
        except FileNotFoundError:
            continue
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise StockError(f"{file}: not UTF-8 text (byte {exc.start})") from None
        lines = _physical_lines(text)
        header: list[str] | None = None
        for index, physical in enumerate(lines):
            content = _content(physical)
            if index == 0 and content.startswith("\ufeff"):
                content = " " * len("\ufeff") + content[1:]  # keep offsets; blank is skipped
            if _is_skipped(content):
                continue
            try:
                fields = _split_fields(content)
            except ValueError:
                continue  # load_catalog reports it; such a row has no usable stock field
            if header is None:
                header = [f.text.strip().lower() for f in fields]
                if "id" not in header or "stock" not in header:
                    raise StockError(f"{file}:{index + 1}: header lacks an id or stock column")
                continue
            if len(fields) == len(header) and fields[header.index("id")].text == part_id:
                found.append(_StockCell(file, text, lines, index, fields[header.index("stock")]))
    if not found:
        raise StockError(f"no part with id {part_id!r} in catalog '{directory}'")
    if len(found) > 1:
        places = ", ".join(f"{c.file}:{c.index + 1}" for c in found)
        raise StockError(f"id {part_id!r} appears more than once ({places})")
    return found[0]


def _update_stock(
    catalog_dir: str | os.PathLike[str], part_id: str, change: Callable[[int], int]
) -> tuple[int, int]:
    """Under the lock: read the stock of ``part_id``, write ``change(old)``; (old, new)."""
    directory = Path(catalog_dir)
    if not directory.is_dir():
        raise StockError(f"'{directory}' is not a catalog directory")
    with catalog_lock(directory):
        cell = _find_stock_cell(directory, part_id)
        where = f"{cell.file}:{cell.index + 1}: stock"
        try:
            old_value = parse_number(cell.field.text)
        except ValueError as exc:
            raise StockError(f"{where}: {exc}") from None
        if not old_value.is_integer() or old_value < 0:
            raise StockError(f"{where}: {cell.field.text!r} is not a count of pieces")
        old = int(old_value)
        new = change(old)
        line = cell.lines[cell.index]
        lines = list(cell.lines)
        lines[cell.index] = line[: cell.field.start] + str(new) + line[cell.field.end :]
        text = "".join(lines)
        if text != cell.text:
            write_atomic(cell.file, text.encode("utf-8"))
        return old, new


def set_stock(catalog_dir: str | os.PathLike[str], part_id: str, count: int) -> int:
    """Set the pieces on hand of ``part_id`` to ``count`` (>= 0); returns the old count.

    Only the stock field's characters change; every other byte of the file stays.
    """
    _check_count(count, "stock count")
    if count < 0:
        raise StockError(f"stock count must be >= 0, got {count}")
    old, _ = _update_stock(catalog_dir, part_id, lambda _old: count)
    return old


def adjust_stock(catalog_dir: str | os.PathLike[str], part_id: str, delta: int) -> int:
    """Add ``delta`` pieces (negative to take) to ``part_id``'s stock; returns the new count.

    Refuses, leaving the file unchanged, if the stock would go below zero.
    """
    _check_count(delta, "stock change")

    def change(old: int) -> int:
        if old + delta < 0:
            raise StockError(f"cannot take {-delta} of {part_id!r}: only {old} on hand")
        return old + delta

    _, new = _update_stock(catalog_dir, part_id, change)
    return new
