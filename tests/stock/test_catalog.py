"""Tests for the catalog layer: loading, validation messages, stale temporary files.

Stock writes are tested in test_stock_writes.py."""

from __future__ import annotations

import os
import shutil
import time
from pathlib import Path

import pytest

from tristock.stock import eseries
from tristock.stock.catalog import (
    Catalog,
    CatalogError,
    CatalogIssue,
    load_catalog,
    read_table,
)
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

REPO = Path(__file__).resolve().parents[2]
FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"
SMALL = FIXTURES / "small_catalog"

RESISTOR_HEADER = "id,value_ohm,tolerance_pct,tempco_ppm,series,power_w,package,unit_cost,stock"


@pytest.fixture
def small(tmp_path: Path) -> Path:
    """A writable copy of the small valid catalog."""
    target = tmp_path / "small"
    shutil.copytree(SMALL, target)
    return target


def _issues(path: Path | str) -> list[str]:
    with pytest.raises(CatalogError) as caught:
        load_catalog(path)
    return [str(issue) for issue in caught.value.errors]


# ---------------------------------------------------------------------------------------------
# Loading and validation


def test_broken_catalog_reports_every_problem(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(REPO)
    r = "tests/fixtures/broken_catalog/resistors.csv"
    c = "tests/fixtures/broken_catalog/capacitors.csv"
    o = "tests/fixtures/broken_catalog/opamps.csv"
    p = "tests/fixtures/broken_catalog/pots.csv"
    pot_columns = "id, value_ohm, tolerance_pct, tempco_ppm, kind, unit_cost, stock"
    dielectrics = (
        "ALU, C0G, NIOBIUM, NP0, PEN, PET, PP, PPS, PS, TANT, X5R, X6S, X7R, X7S, X8R, Y5V, Z5U"
    )
    expected = [
        f"{r}:5: value_ohm: '4k7k': two multiplier letters",
        f"{r}:6: value_ohm: must be > 0, got -10",
        f"{r}:7: tolerance_pct: must be in (0, 50] %, got 0",
        f"{r}:9: tolerance_pct: must be in (0, 50] %, got 60",
        f"{r}:10: tempco_ppm: 'abc': no digits",
        f"{r}:11: series: 'E97': unknown E-series; known series: E6, E12, E24, E48, E96, E192",
        # 4.8 is not among the E24 figures (IEC 60063)
        f"{r}:12: value_ohm: '4.8k' is not an E24 value",
        f"{r}:13: stock: must be >= 0, got -5",
        f"{r}:14: stock: must be a whole number, got 2.5",
        f"{r}:15: unit_cost: must be >= 0, got -0.01",
        f"{r}:16: id: duplicate id 'BR-1K00' (first at {r}:4)",
        f"{r}:17: expected 9 fields as in the header (line 3), found 8",
        f"{c}:4: dielectric: unknown dielectric 'X9Q' (known: {dielectrics})",
        f"{c}:5: tempco_ppm: is required for C0G (class I and film dielectrics)",
        f"{c}:6: temp_band_pct: is required for X7R (class II dielectric)",
        f"{c}:7: voltage_v: must be > 0, got 0",
        f"{c}:8: tolerance_pct: must be in (0, 50] %, got 75",
        f"{o}:4: channels: must be >= 1, got 0",
        f"{o}:5: supply_min_v: must be less than supply_max_v (5.5 >= 5.5)",
        f"{o}:6: swing_neg_v: must be >= 0, got -0.1",
        f"{o}:7: slew_v_per_us: must be > 0, got 0",
        f"{o}:8: delay_s: must be >= 0, got -1e-06",
        f"{o}:9: channels: must be a whole number, got 1.5",
        f"{o}:10: output_a: must be > 0, got 0",
        f"{o}:10: id: duplicate id 'BR-NEG' (first at {r}:6)",
        f"{p}:2: taper: unknown column (columns of pots.csv: {pot_columns})",
        f"{p}:2: kind: required column is missing",
    ]
    assert _issues("tests/fixtures/broken_catalog") == expected


def test_issue_prints_file_line_column_message() -> None:
    issue = CatalogIssue("cat/resistors.csv", 14, "value_ohm", "'4k7k': two multiplier letters")
    assert str(issue) == "cat/resistors.csv:14: value_ohm: '4k7k': two multiplier letters"
    assert str(CatalogIssue("cat/opamps.csv", None, None, "required file is missing")) == (
        "cat/opamps.csv: required file is missing"
    )


def test_small_catalog_loads_into_part_types() -> None:
    catalog = load_catalog(SMALL)
    assert (len(catalog.resistors), len(catalog.capacitors)) == (12, 6)
    assert (len(catalog.opamps), len(catalog.pots)) == (3, 2)
    assert len(catalog) == 23
    r = catalog.get("TR-4K70")
    assert isinstance(r, Resistor)
    assert r.value_ohm == 4700.0 and r.series == "E12" and r.stock == 3000
    # "1k5", "2k7" (IEC 60062 codes) and "1800" (plain) read the same as SI-prefixed values
    values = {r.id: r.value_ohm for r in catalog.resistors}
    assert (values["TR-1K50"], values["TR-2K70"], values["TR-1K80"]) == (1500.0, 2700.0, 1800.0)
    x7r = catalog.get("TX-100N")
    assert isinstance(x7r, Capacitor)
    assert x7r.tempco_ppm is None and x7r.temp_band_pct == 15.0 and x7r.is_class_ii
    assert catalog.kind_of("TU-JF2") == "opamps"
    assert catalog.kind_of("TP-10K0") == "pots"
    assert "TC-1N00" in catalog and "NOPE" not in catalog
    assert {part.id for part in catalog} == {
        *(p.id for p in catalog.resistors),
        *(p.id for p in catalog.capacitors),
        *(p.id for p in catalog.opamps),
        *(p.id for p in catalog.pots),
    }


def test_unknown_id_is_a_clear_key_error() -> None:
    catalog = load_catalog(SMALL)
    with pytest.raises(KeyError, match="no part with id 'R-MISSING'"):
        catalog.get("R-MISSING")
    with pytest.raises(KeyError, match="R-MISSING"):
        catalog.kind_of("R-MISSING")


def test_repr_is_short(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(REPO)
    catalog = load_catalog("tests/fixtures/small_catalog")
    assert repr(catalog) == (
        "Catalog('tests/fixtures/small_catalog': 12 resistors, 6 capacitors, 3 op amps, 2 pots)"
    )


def test_catalog_rejects_duplicate_ids_when_built_directly() -> None:
    pot = Pot("X-1", 1e3, 10, 100, "trimmer", 1.0, 1)
    with pytest.raises(ValueError, match="duplicate part id 'X-1'"):
        Catalog(Path("x"), (), (), (), (pot, pot))


def test_loading_is_all_or_nothing(small: Path) -> None:
    with (small / "opamps.csv").open("a") as fh:
        fh.write("TU-BAD,2,3,36,1.5,1.5,0.5,1e6,5e-6,2e-3,8e-8,0.02,0.16,lots\n")
    with (small / "pots.csv").open("a") as fh:
        fh.write("TT-LOG,10k,20,100,log,0.50,10\n")
    before = {f.name: f.read_bytes() for f in small.iterdir()}
    assert _issues(small) == [
        f"{small}/opamps.csv:6: stock: 'lots': no digits",
        f"{small}/pots.csv:5: kind: must be trimmer or panel, got 'log'",
    ]
    assert {f.name: f.read_bytes() for f in small.iterdir()} == before


def test_columns_in_any_order_and_case(tmp_path: Path) -> None:
    text = (
        "# reordered\n"
        "Stock,ID,Series,Value_Ohm,Tolerance_Pct,Tempco_Ppm,Power_W,Package,Unit_Cost\n"
        "10,A-1,e24,4k7,5,200,0.125,0805,0.003\n"
        "11,A-2,E24,4.7k,5,200,0.125,0805,0.003\n"
        "12,A-3,,4700,5,200,0.125,0805,0.003\n"
    )
    parts = [p for p in read_table("resistors", text, "reordered.csv") if isinstance(p, Resistor)]
    assert [p.value_ohm for p in parts] == [4700.0, 4700.0, 4700.0]
    assert [p.stock for p in parts] == [10, 11, 12]
    assert [p.series for p in parts] == ["E24", "E24", None]


def test_dielectric_is_case_insensitive_and_normalised() -> None:
    text = (
        "id,value_f,dielectric,tolerance_pct,tempco_ppm,temp_band_pct,voltage_v,package,"
        "unit_cost,stock\n"
        "C-1,10n,c0g,5,0,,50,0603,0.02,1\n"
        "C-2,1u,x7r,10,,15,25,0805,0.01,1\n"
        "C-3,100n,Pp,2,-200,,100,film,0.2,1\n"
    )
    parts = read_table("capacitors", text)
    assert [p.dielectric for p in parts if isinstance(p, Capacitor)] == ["C0G", "X7R", "PP"]


def test_negative_tempco_and_signed_values_are_numbers() -> None:
    text = (
        "id,value_ohm,tolerance_pct,tempco_ppm,kind,unit_cost,stock\nP-1,10k,20,-150,Panel,1.5,0\n"
    )
    (pot,) = read_table("pots", text)
    assert isinstance(pot, Pot)
    assert pot.tempco_ppm == -150.0 and pot.kind == "panel"


def test_required_files_and_optional_pots(small: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    (small / "pots.csv").unlink()
    assert load_catalog(small).pots == ()
    (small / "opamps.csv").unlink()
    assert _issues(small) == [f"{small}/opamps.csv: required file is missing"]
    assert _issues(small / "nowhere") == [f"{small}/nowhere: not a catalog directory"]


def test_header_problems_name_the_header_line(tmp_path: Path) -> None:
    text = (
        "\n# header comes third\nid,value_ohm,tolerance_pct,tempco_ppm,kind,unit_cost,stock,kind\n"
    )
    with pytest.raises(CatalogError) as caught:
        read_table("pots", text, "p.csv")
    assert [str(e) for e in caught.value.errors] == ["p.csv:3: kind: column appears twice"]
    with pytest.raises(CatalogError) as caught:
        read_table("pots", "# only a comment\n\n", "p.csv")
    assert [str(e) for e in caught.value.errors] == [
        "p.csv: no header line (expected: id, value_ohm, tolerance_pct, tempco_ppm, kind, "
        "unit_cost, stock)"
    ]


def test_bad_quoting_is_reported_at_its_line() -> None:
    text = f'{RESISTOR_HEADER}\nQ-1,"1k,5,100,,0.1,0603,0.004,1\nQ-2,1k,5,100,,0.1,"06"03,0.004,1\n'
    with pytest.raises(CatalogError) as caught:
        read_table("resistors", text, "q.csv")
    assert [str(e) for e in caught.value.errors] == [
        "q.csv:2: unterminated quote starting at column 5",
        "q.csv:3: text after a closing quote at column 23",
    ]


def test_spreadsheet_empty_rows_and_quoted_cells_are_read() -> None:
    text = f'{RESISTOR_HEADER}\r\n,,,,,,,,\r\n "Q-1" , "1k" ,5,100,"",0.1,"0603",0.004, 7 \r\n'
    (part,) = read_table("resistors", text)
    assert isinstance(part, Resistor)
    assert (part.id, part.value_ohm, part.series, part.package, part.stock) == (
        "Q-1",
        1000.0,
        None,
        "0603",
        7,
    )


def test_opamp_headroom_must_leave_an_output_range() -> None:
    header = (
        "id,channels,supply_min_v,supply_max_v,swing_pos_v,swing_neg_v,slew_v_per_us,gbw_hz,"
        "delay_s,offset_v,bias_a,output_a,unit_cost,stock"
    )
    text = f"{header}\nU-1,2,1,3,1.5,1.5,1,1e6,1e-6,1e-3,1e-12,0.02,0.3,1\n"
    with pytest.raises(CatalogError) as caught:
        read_table("opamps", text, "o.csv")
    assert [str(e) for e in caught.value.errors] == [
        "o.csv:2: swing_pos_v: swing_pos_v + swing_neg_v (3 V) leaves no output range within "
        "supply_max_v (3 V)"
    ]


# ---------------------------------------------------------------------------------------------
# The demo stock room


def test_demo_catalog_has_the_required_spread() -> None:
    catalog = load_catalog(REPO / "catalogs" / "demo")

    def resistor_values(series: str, tolerance: float) -> list[float]:
        return sorted(
            r.value_ohm
            for r in catalog.resistors
            if r.series == series and r.tolerance_pct == tolerance
        )

    # IEC 60063 members over 10 ohm .. 1 Mohm, both ends included
    assert resistor_values("E96", 1) == eseries.values("E96", 10, 1e6)
    assert resistor_values("E24", 5) == eseries.values("E24", 10, 1e6)
    precision = [r for r in catalog.resistors if r.tolerance_pct == 0.1]
    assert 15 <= len(precision) <= 30
    assert all(r.tempco_ppm == 25 and 1e3 <= r.value_ohm <= 1e5 for r in precision)
    assert all(r.series == "E96" and eseries.is_member("E96", r.value_ohm) for r in precision)
    assert 600 <= len(catalog.resistors) <= 700

    c0g = sorted(c.value_f for c in catalog.capacitors if c.dielectric == "C0G")
    assert c0g == eseries.values("E12", 10e-12, 100e-9)
    for film in ("PP", "PET"):
        values = [c.value_f for c in catalog.capacitors if c.dielectric == film]
        assert min(values) == 1e-9 and max(values) == 10e-6
    assert any(c.dielectric == "X7R" and c.temp_band_pct == 15 for c in catalog.capacitors)
    assert 100 <= len(catalog.capacitors) <= 150

    assert len(catalog.opamps) >= 8
    assert {min(o.channels, 2) for o in catalog.opamps} == {1, 2}
    assert {p.kind for p in catalog.pots} == {"trimmer", "panel"}
    for kind in ("resistors", "capacitors", "opamps", "pots"):
        parts: tuple[Resistor | Capacitor | OpAmp | Pot, ...] = getattr(catalog, kind)
        assert any(p.stock == 0 for p in parts), kind
        assert any(p.stock > 0 for p in parts), kind


def test_demo_files_start_with_the_stock_room_name() -> None:
    for kind in ("resistors", "capacitors", "opamps", "pots"):
        first = (REPO / "catalogs" / "demo" / f"{kind}.csv").read_text().splitlines()[0]
        assert first.startswith("# Fennmoor Instruments"), kind


# ---------------------------------------------------------------------------------------------
# Temporary files left by killed writes


def test_load_removes_stale_temporary_files_only(small: Path) -> None:
    old = time.time() - 120.0
    stale = [small / ".resistors.csv.a1b2c3d4.tmp", small / ".pots.csv.x_9Yz0Qw.tmp"]
    fresh = small / ".capacitors.csv.0f0f0f0f.tmp"  # another writer's, still in progress
    foreign = [
        small / ".notes.csv.a1b2c3d4.tmp",  # not one of our tables
        small / ".resistors.csv.tmp",  # not our name pattern
        small / "resistors.csv.a1b2c3d4.tmp",  # no leading dot
    ]
    for path in [*stale, fresh, *foreign]:
        path.write_bytes(b"half a table")
    for path in [*stale, *foreign]:
        os.utime(path, (old, old))
    load_catalog(small)
    assert not any(p.exists() for p in stale)
    assert fresh.exists() and all(p.exists() for p in foreign)
