"""The diode table (diodes.csv): parsing, validation messages (file:line: column: message),
the table optional in a catalog, and the demo stock room's diodes."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tristock.stock.catalog import CatalogError, load_catalog, read_table
from tristock.stock.diodes import Diode

REPO = Path(__file__).resolve().parents[2]
SMALL = Path(__file__).resolve().parents[1] / "fixtures" / "small_catalog"
HEADER = "id,kind,vz_v,iz_test_a,tolerance_pct,tempco_mv_per_c,rz_ohm,vf_v,power_w,unit_cost,stock"


def _problems(text: str) -> list[str]:
    with pytest.raises(CatalogError) as caught:
        read_table("diodes", text, "d.csv")
    return [str(e) for e in caught.value.errors]


def test_zener_and_signal_rows_become_diodes() -> None:
    parts = read_table(
        "diodes",
        f"{HEADER}\nZ1,zener,5.1,5m,2,0.3,55,0.72,0.5,0.04,10\nS1,Signal,,,10,-2,,620m,0.5,0.01,3\n",
    )
    zener, signal = parts
    assert zener == Diode("Z1", "zener", 5.1, 5e-3, 2.0, 0.3, 55.0, 0.72, 0.5, 0.04, 10)
    assert zener.is_zener and zener.value == 5.1
    assert signal == Diode("S1", "signal", None, None, 10.0, -2.0, 0.0, 0.62, 0.5, 0.01, 3)
    assert not signal.is_zener and signal.value == 0.62


def test_every_bad_cell_is_reported_at_its_line_and_column() -> None:
    text = "\n".join(
        [
            HEADER,
            "Z1,zener,,5m,2,0.3,55,0.72,0.5,0.04,10",  # line 2: no vz_v
            "Z2,zener,5.1,0,60,0.3,-1,0.72,0.5,0.04,10",  # line 3
            "S1,signal,5.1,1m,10,-2,,0.62,0.5,0.01,3",  # line 4: zener columns on a signal
            "S2,led,,,10,-2,,3.2,0,0.01,1.5",  # line 5
            "Z1,zener,6.2,5m,5,2.3,10,0.72,0.5,0.02,1",  # line 6: repeated id
        ]
    )
    assert _problems(text) == [
        "d.csv:2: vz_v: is empty",
        "d.csv:3: iz_test_a: must be > 0, got 0",
        "d.csv:3: rz_ohm: must be >= 0, got -1",
        "d.csv:3: tolerance_pct: must be in (0, 50] %, got 60",
        "d.csv:4: vz_v: is for zeners: leave it blank for a signal diode",
        "d.csv:4: iz_test_a: is for zeners: leave it blank for a signal diode",
        "d.csv:5: kind: must be zener or signal, got 'led'",
        "d.csv:5: vf_v: must be in (0, 2] V (the forward drop at 1 mA), got 3.2",
        "d.csv:5: power_w: must be > 0, got 0",
        "d.csv:5: stock: must be a whole number, got 1.5",
        "d.csv:6: id: duplicate id 'Z1' (first at d.csv:2)",
    ]


def test_header_must_name_the_diode_columns() -> None:
    problems = _problems("id,kind,vz_v\nZ1,zener,5.1\n")
    assert problems[0].startswith("d.csv:1: iz_test_a: required column is missing")
    assert len(problems) == 8  # every missing column, one line each


def test_the_table_is_optional_and_ids_are_unique_across_tables(tmp_path: Path) -> None:
    target = tmp_path / "cat"
    shutil.copytree(SMALL, target)
    (target / "diodes.csv").unlink(missing_ok=True)
    assert load_catalog(target).diodes == ()
    taken = load_catalog(target).resistors[0].id
    (target / "diodes.csv").write_text(f"{HEADER}\n{taken},zener,5.1,5m,2,0.3,55,0.72,0.5,1,1\n")
    with pytest.raises(CatalogError) as caught:
        load_catalog(target)
    (issue,) = caught.value.errors
    assert issue.file.endswith("diodes.csv") and issue.line == 2 and issue.column == "id"
    assert "duplicate id" in issue.message


def test_demo_diodes_cover_the_zener_range_and_signal_diodes() -> None:
    catalog = load_catalog(REPO / "catalogs" / "demo")
    zeners = [d for d in catalog.diodes if d.is_zener]
    # zener voltages: the E24-derived 2.4 .. 10 V steps common practice for 0.5 W zeners
    voltages = sorted({d.vz_v for d in zeners if d.vz_v is not None})
    assert voltages[0] == 2.4 and voltages[-1] == 10.0 and len(voltages) == 16
    for tolerance in (2.0, 5.0):
        assert {d.vz_v for d in zeners if d.tolerance_pct == tolerance} == set(voltages)
    signal = [d for d in catalog.diodes if not d.is_zener]
    assert len(signal) == 2 and all(0.2 < d.vf_v < 0.8 for d in signal)
    assert all(d.id.startswith("GD-") for d in catalog.diodes)
    assert any(d.stock == 0 for d in catalog.diodes) and catalog.kind_of("GD-SW1") == "diodes"
    first = (REPO / "catalogs" / "demo" / "diodes.csv").read_text().splitlines()[0]
    assert first.startswith("# Fennmoor Instruments")
