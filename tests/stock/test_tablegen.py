"""Tests for the table generator: exact IEC 60063 values, readable cells, unique codes."""

from __future__ import annotations

import shutil
from pathlib import Path

import eseries as reference_eseries  # the `eseries` package, an outside reference
import pytest

from tristock.stock import eseries, units
from tristock.stock.catalog import CatalogError, load_catalog, read_table
from tristock.stock.parts import Capacitor, Resistor
from tristock.stock.tablegen import (
    format_cell_value,
    generate_capacitors,
    generate_resistors,
    value_code,
    write_table,
)

SMALL = Path(__file__).resolve().parents[1] / "fixtures" / "small_catalog"
RESISTOR_LETTERS = {0: "R", 3: "K", 6: "M", 9: "G", 12: "T"}
CAPACITOR_LETTERS = {-15: "F", -12: "P", -9: "N", -6: "U", -3: "M"}


def _resistors(text: str) -> list[Resistor]:
    return [p for p in read_table("resistors", text) if isinstance(p, Resistor)]


def _capacitors(text: str) -> list[Capacitor]:
    return [p for p in read_table("capacitors", text) if isinstance(p, Capacitor)]


@pytest.mark.parametrize(
    ("series", "low", "high"),
    [("E6", 1.0, 1e7), ("E24", 10.0, 1e6), ("E96", 10.0, 1e6), ("E192", 0.1, 1e3)],
)
def test_generated_resistors_hold_exactly_the_series_values(
    series: str, low: float, high: float
) -> None:
    text = generate_resistors(series, low, high, 1, 100, 0.1, "0603", 0.004, 500, "RG-")
    parts = _resistors(text)
    assert [p.value_ohm for p in parts] == eseries.values(series, low, high)
    assert {(p.series, p.tolerance_pct, p.tempco_ppm, p.power_w) for p in parts} == {
        (series, 1.0, 100.0, 0.1)
    }
    assert {(p.package, p.unit_cost, p.stock) for p in parts} == {("0603", 0.004, 500)}
    assert len({p.id for p in parts}) == len(parts)
    assert all(p.id.startswith("RG-") for p in parts)


def test_generated_e24_matches_the_eseries_package() -> None:
    text = generate_resistors("E24", 10, 1e6, 5, 200, 0.125, "0805", 0.003, 1, "RJ-")
    ours = [p.value_ohm for p in _resistors(text)]
    # cross-check with the `eseries` package (IEC 60063 tables)
    theirs = list(reference_eseries.erange(reference_eseries.E24, 10, 1e6))
    assert ours == pytest.approx(theirs, rel=1e-12)
    assert len(ours) == 24 * 5 + 1


def test_generated_capacitors_load_in_a_catalog(tmp_path: Path) -> None:
    catalog_dir = tmp_path / "gen"
    shutil.copytree(SMALL, catalog_dir)
    c0g = generate_capacitors(
        "E12", 10e-12, 100e-9, "C0G", 5, 0, None, 50, "0603", 0.02, 100, "GC0-", title="gen"
    )
    x7r = generate_capacitors("E6", 1e-9, 1e-6, "x7r", 10, None, 15, 50, "0805", 0.01, 10, "GX-")
    body = "".join(x7r.splitlines(keepends=True)[1:])  # second table without its header
    write_table(catalog_dir / "capacitors.csv", c0g + body, overwrite=True)
    catalog = load_catalog(catalog_dir)
    values: dict[str, list[float]] = {}
    for c in catalog.capacitors:
        values.setdefault(c.dielectric, []).append(c.value_f)
    assert values["C0G"] == eseries.values("E12", 10e-12, 100e-9)
    assert values["X7R"] == eseries.values("E6", 1e-9, 1e-6)
    x7r_parts = [c for c in catalog.capacitors if c.dielectric == "X7R"]
    assert {(c.tempco_ppm, c.temp_band_pct) for c in x7r_parts} == {(None, 15.0)}
    assert c0g.startswith("# gen\nid,value_f,")


def test_cells_are_readable_and_read_back_exactly() -> None:
    text = generate_resistors("E24", 4.7e3, 4.7e3, 5, 200, 0.125, "0805", 0.003, 1, "RM-")
    assert text.splitlines()[1] == "RM-4K70,4.7k,5,200,E24,0.125,0805,0.003,1"
    caps = generate_capacitors("E12", 10e-9, 10e-9, "PP", 2, -200, None, 100, "P5", 0.2, 3, "CP-")
    assert caps.splitlines()[1] == "CP-10N0,10n,PP,2,-200,,100,P5,0.2,3"
    for value in eseries.values("E192", 1e-13, 1e9):
        cell = format_cell_value(value)
        assert cell.isascii() and " " not in cell, cell
        assert units.parse_value(cell) == value, cell


@pytest.mark.parametrize(
    ("value", "letters", "code"),
    [
        # IEC 60062 letter code: the multiplier letter stands for the decimal point
        (4700.0, RESISTOR_LETTERS, "4K70"),
        (100.0, RESISTOR_LETTERS, "100R"),
        (10.0, RESISTOR_LETTERS, "10R0"),
        (0.47, RESISTOR_LETTERS, "R470"),
        (1e6, RESISTOR_LETTERS, "1M00"),
        (10.2e3, RESISTOR_LETTERS, "10K2"),
        (1e-8, CAPACITOR_LETTERS, "10N0"),
        (1e-7, CAPACITOR_LETTERS, "100N"),
        (2.2e-6, CAPACITOR_LETTERS, "2U20"),
        (1e-11, CAPACITOR_LETTERS, "10P0"),
        # more than three figures are kept, so distinct values never share a code
        (4702.5, RESISTOR_LETTERS, "4K7025"),
    ],
)
def test_value_codes(value: float, letters: dict[int, str], code: str) -> None:
    assert value_code(value, letters) == code


def test_bad_requests_are_refused_with_the_field_named() -> None:
    with pytest.raises(ValueError, match="'E7'"):
        generate_resistors("E7", 10, 100, 1, 100, 0.1, "0603", 0.004, 1, "R-")
    with pytest.raises(ValueError, match="no E12 values between"):
        generate_resistors("E12", 4.8e3, 5.5e3, 1, 100, 0.1, "0603", 0.004, 1, "R-")
    with pytest.raises(ValueError, match="id_prefix"):
        generate_resistors("E12", 10, 100, 1, 100, 0.1, "0603", 0.004, 1, "R 1")
    with pytest.raises(CatalogError, match=r"tolerance_pct: must be in \(0, 50\] %, got 60"):
        generate_resistors("E12", 10, 100, 60, 100, 0.1, "0603", 0.004, 1, "R-")
    with pytest.raises(CatalogError, match="tempco_ppm: is required for C0G"):
        generate_capacitors("E12", 1e-9, 1e-8, "C0G", 5, None, None, 50, "0603", 0.02, 1, "C-")
    with pytest.raises(CatalogError, match="stock: must be >= 0, got -1"):
        generate_capacitors("E6", 1e-9, 1e-8, "PET", 5, 400, None, 63, "P5", 0.1, -1, "C-")


def test_write_table_refuses_to_overwrite_unless_asked(tmp_path: Path) -> None:
    target = tmp_path / "resistors.csv"
    first = generate_resistors("E6", 10, 100, 5, 200, 0.125, "0805", 0.003, 1, "R-")
    second = generate_resistors("E12", 10, 100, 5, 200, 0.125, "0805", 0.003, 1, "R-")
    write_table(target, first)
    assert target.read_text() == first
    with pytest.raises(FileExistsError, match=r"resistors\.csv: file exists"):
        write_table(target, second)
    assert target.read_text() == first
    write_table(target, second, overwrite=True)
    assert target.read_text() == second
    assert [p.name for p in tmp_path.iterdir()] == ["resistors.csv"]
