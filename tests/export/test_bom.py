"""``tristock export bom``: one row per stock code, pieces = per board x boards, costs and
stock after the build, a total row; CSV parsed back with the csv module. The expected figures
are worked by hand from the demo catalog's rows (resistors.csv, capacitors.csv, opamps.csv)."""

from __future__ import annotations

import contextlib
import csv
import io
import json
from pathlib import Path

import pytest

from tristock.cli import main
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.export.bom import COLUMNS, bill_of_materials
from tristock.export.designfile import parse_design
from tristock.spec.loading import read_mapping
from tristock.stock.catalog import load_catalog

DEMO = demo_catalog_dir()
RANK1 = {"U1": "GA-JF2", "R1": "R0B-21K5", "R2": "R1F-78K7", "R3": "R1F-158K", "C1": "CPPG-2N20"}


def tristock(*argv: str | Path) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def design_file(tmp_path: Path) -> Path:
    path = tmp_path / "rank1.json"
    spec = read_mapping(example_spec_path("demo"))
    path.write_text(json.dumps({"spec": spec, "parts": RANK1}), encoding="utf-8")
    return path


def test_csv_rows_match_the_catalog_by_hand(design_file: Path, tmp_path: Path) -> None:
    out = tmp_path / "bom.csv"
    code, stdout, err = tristock(
        "export", "bom", design_file, "--catalog", DEMO, "--boards", "300", "-o", out
    )
    assert code == 0 and stdout == "", err
    raw = out.read_bytes()
    assert not raw.startswith(b"\xef\xbb\xbf")  # UTF-8 without a byte-order mark
    rows = list(csv.DictReader(io.StringIO(raw.decode("utf-8"), newline="")))
    assert list(rows[0]) == list(COLUMNS)
    by_code = {r["stock_code"]: r for r in rows}
    assert list(by_code) == [*RANK1.values(), "TOTAL"]
    # GA-JF2: dual, 0.24 each, 3000 on hand -> 300 pieces, 72.00, 2700 left
    u1 = by_code["GA-JF2"]
    assert (u1["designators"], u1["pieces_for_build"], u1["stock_after"]) == ("U1", "300", "2700")
    assert float(u1["extended_cost"]) == pytest.approx(72.0)
    # R0B-21K5: 21.5 kΩ 0.1 % E96, 0.32 each, 250 on hand -> 50 short, 96.00
    r1 = by_code["R0B-21K5"]
    assert (r1["value"], r1["tolerance_pct"], r1["dielectric_or_series"]) == (
        "21.5 kΩ",
        "0.1",
        "E96",
    )
    assert (r1["stock_after"], r1["shortfall"]) == ("0", "50")
    assert float(r1["extended_cost"]) == pytest.approx(96.0)
    # R1F-158K: 500 on hand -> 200 left; CPPG-2N20: 2.2 nF PP, 0.25 each -> 75.00
    assert by_code["R1F-158K"]["stock_after"] == "200"
    c1 = by_code["CPPG-2N20"]
    assert (c1["value"], c1["dielectric_or_series"], c1["package"]) == ("2.2 nF", "PP", "film-P5")
    assert float(c1["extended_cost"]) == pytest.approx(75.0)
    total = by_code["TOTAL"]
    # 72 + 96 + 1.2 + 1.2 + 75 = 245.40; one board 0.24 + 0.32 + 0.004 + 0.004 + 0.25 = 0.818
    assert float(total["extended_cost"]) == pytest.approx(245.4)
    assert float(total["unit_cost"]) == pytest.approx(0.818)
    assert (total["pieces_per_board"], total["pieces_for_build"], total["shortfall"]) == (
        "5",
        "1500",
        "50",
    )


def test_totals_are_pieces_times_boards_and_shared_codes_share_a_row() -> None:
    catalog = load_catalog(DEMO)
    spec = read_mapping(example_spec_path("demo"))
    parts = {**RANK1, "R2": "R1F-158K"}  # R2 and R3 on one stock code
    _, design = parse_design({"spec": spec, "parts": parts}, catalog)
    bom = bill_of_materials(design, 7)
    shared = [r for r in bom.rows if r.stock_code == "R1F-158K"]
    assert len(shared) == 1 and shared[0].designators == "R2 R3"
    assert shared[0].pieces_per_board == 2 and shared[0].pieces_for_build == 14
    for r in bom.rows:
        assert r.pieces_for_build == r.pieces_per_board * 7
    assert bom.total.pieces_for_build == sum(r.pieces_for_build for r in bom.rows)


def test_a_single_channel_op_amp_takes_two_pieces_a_board() -> None:
    catalog = load_catalog(DEMO)
    spec = read_mapping(example_spec_path("demo"))
    _, design = parse_design({"spec": spec, "parts": {**RANK1, "U1": "GA-PR1"}}, catalog)
    u1 = bill_of_materials(design, 10).rows[0]
    # GA-PR1: one channel, 2.10 each, 120 on hand -> 20 pieces, 42.00, 100 left
    assert (u1.pieces_per_board, u1.pieces_for_build, u1.stock_after) == (2, 20, 100)
    assert u1.extended_cost == pytest.approx(42.0)


def test_json_and_the_specs_build_by_default(design_file: Path) -> None:
    code, out, err = tristock("export", "bom", design_file, "--catalog", DEMO, "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["boards"] == 100  # the demo spec's build.boards
    assert data["total"]["pieces_for_build"] == 500


def test_bad_design_file_names_the_field(tmp_path: Path) -> None:
    path = tmp_path / "bad.json"
    spec = read_mapping(example_spec_path("demo"))
    path.write_text(json.dumps({"spec": spec, "parts": {**RANK1, "R3": "NOPE"}}), "utf-8")
    code, out, err = tristock("export", "bom", path, "--catalog", DEMO, "-o", tmp_path / "b.csv")
    assert code == 2 and out == ""
    assert "parts.R3" in err and str(path) in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "b.csv").exists()
    code, _, err = tristock("export", "bom", path, "--catalog", DEMO, "--boards", "0")
    assert code == 2 and "--boards" in err
