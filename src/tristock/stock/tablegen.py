"""Generate part tables for an IEC 60063 series over chosen decades.

Each generated row holds one member of ``eseries.values(series, low, high)`` (both ends
inclusive, exact IEC 60063 values), written in SI-prefix form without spaces or unit symbols
("4.7k", "10n", "2.2u") that reads back to exactly the same float. Stock codes are the prefix
followed by a fixed-width value code: three significant figures with the multiplier letter as
the decimal point, upper case ("RM-4K70", "CC0-10N0", "CC0-100N").

The text is validated with the catalog's own reader before it is returned, so it always loads.
"""

from __future__ import annotations

import os
from decimal import Decimal
from typing import Final

from tristock.stock import eseries, units
from tristock.stock.atomicio import write_atomic
from tristock.stock.catalog import COLUMNS, read_table

#: Letters of the value codes, by power of ten of the mantissa.
_RESISTOR_LETTERS: Final[dict[int, str]] = {0: "R", 3: "K", 6: "M", 9: "G", 12: "T"}
_CAPACITOR_LETTERS: Final[dict[int, str]] = {-15: "F", -12: "P", -9: "N", -6: "U", -3: "M"}
_CODE_DIGITS: Final[int] = 3


def format_cell_value(value: float) -> str:
    """``value`` as a table cell: SI prefix, no space, no unit, ASCII "u" for micro; plain
    decimals between 0.001 and 1 ("0.47" rather than "470m").

    Uses ``units.format_value`` and falls back to ``repr`` if that form would not read back
    to exactly ``value`` through ``units.parse_value``.
    """
    if 1e-3 <= value < 1:
        plain = format(Decimal(repr(value)), "f")
        if units.parse_value(plain) == value:
            return plain
    for digits in (3, 6, 17):
        text = units.format_value(value, digits=digits).replace("\u00b5", "u")
        if units.parse_value(text) == value:
            return text
    return repr(value)


def value_code(value: float, letters: dict[int, str]) -> str:
    """Fixed-width value code: mantissa = value / 10**p (p the largest power of ``letters`` not
    above the value) with three significant figures, the letter standing for the point.

    4700 -> "4K70", 100 -> "100R", 0.47 -> "R470", 1e-8 -> "10N0". A value needing more than
    three figures keeps all of them, so distinct values never share a code.
    """
    exact = Decimal(repr(value))
    if exact <= 0:
        raise ValueError(f"value {value!r}: a code needs a positive value")
    powers = sorted(letters)
    fitting = [p for p in powers if p <= exact.adjusted()]
    power = max(fitting) if fitting else powers[0]
    mantissa = format(exact.scaleb(-power).normalize(), "f")
    whole, _, fraction = mantissa.partition(".")
    whole = whole.lstrip("0")
    width = max(_CODE_DIGITS - len(whole), len(fraction))
    return f"{whole}{letters[power]}{fraction.ljust(width, '0')}"


def _plain(value: float) -> str:
    """A non-value cell (tolerance, cost, ...): shortest text that reads back exactly."""
    if value == int(value) and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def _series_values(series: str, low: float, high: float) -> tuple[str, list[float]]:
    name = eseries.parse_series(series)
    found = eseries.values(name, low, high)
    if not found:
        raise ValueError(f"no {name} values between {low!r} and {high!r}")
    return name, found


def _table(kind: str, rows: list[list[str]], title: str | None) -> str:
    lines = [f"# {title}"] if title else []
    lines.append(",".join(COLUMNS[kind]))
    lines.extend(",".join(row) for row in rows)
    text = "\n".join(lines) + "\n"
    read_table(kind, text, f"<generated {kind}.csv>")
    return text


def _ids(prefix: str, values: list[float], letters: dict[int, str]) -> list[str]:
    if not prefix or any(ch.isspace() or ch in ',"#' for ch in prefix):
        raise ValueError(
            f"id_prefix {prefix!r}: must be non-empty, without blanks, commas or quotes"
        )
    ids = [prefix + value_code(v, letters) for v in values]
    if len(set(ids)) != len(ids):
        raise ValueError(f"id_prefix {prefix!r}: generated ids are not unique")
    return ids


def generate_resistors(
    series: str,
    low: float,
    high: float,
    tolerance_pct: float,
    tempco_ppm: float,
    power_w: float,
    package: str,
    unit_cost: float,
    stock: int,
    id_prefix: str,
    *,
    title: str | None = None,
) -> str:
    """resistors.csv text (header, then one row per ``series`` member in [low, high] ohm).

    Every row shares the tolerance (%), tempco (ppm/°C), power (W), package, cost and stock.
    ``title`` becomes a ``#`` comment line above the header. Raises ValueError for an unknown
    series, an empty range, or row values the catalog would reject (CatalogError).
    """
    name, found = _series_values(series, low, high)
    ids = _ids(id_prefix, found, _RESISTOR_LETTERS)
    rows = [
        [
            part_id,
            format_cell_value(value),
            _plain(tolerance_pct),
            _plain(tempco_ppm),
            name,
            _plain(power_w),
            package,
            _plain(unit_cost),
            str(stock),
        ]
        for part_id, value in zip(ids, found, strict=True)
    ]
    return _table("resistors", rows, title)


def generate_capacitors(
    series: str,
    low: float,
    high: float,
    dielectric: str,
    tolerance_pct: float,
    tempco_ppm: float | None,
    temp_band_pct: float | None,
    voltage_v: float,
    package: str,
    unit_cost: float,
    stock: int,
    id_prefix: str,
    *,
    title: str | None = None,
) -> str:
    """capacitors.csv text (header, then one row per ``series`` member in [low, high] farad).

    ``tempco_ppm`` (ppm/°C) is required for class I and film dielectrics, ``temp_band_pct``
    (± % over the rated band) for class II; None leaves the cell blank.
    """
    _, found = _series_values(series, low, high)
    ids = _ids(id_prefix, found, _CAPACITOR_LETTERS)
    rows = [
        [
            part_id,
            format_cell_value(value),
            dielectric,
            _plain(tolerance_pct),
            "" if tempco_ppm is None else _plain(tempco_ppm),
            "" if temp_band_pct is None else _plain(temp_band_pct),
            _plain(voltage_v),
            package,
            _plain(unit_cost),
            str(stock),
        ]
        for part_id, value in zip(ids, found, strict=True)
    ]
    return _table("capacitors", rows, title)


def write_table(path: str | os.PathLike[str], text: str, overwrite: bool = False) -> None:
    """Write generated table text to ``path`` atomically (temporary file, fsync, rename).

    Refuses with FileExistsError if ``path`` exists, unless ``overwrite`` is True.
    """
    write_atomic(path, text.encode("utf-8"), overwrite=overwrite)
