"""The variants through the CLI: DESIGN files of every circuit (``topology`` key) analysed,
simulated and exported, the bundled comparator example searched, read back and re-optimised,
and the plain refusals (what is not searched) as one line with
exit 2."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from cli_helpers import DEMO_CATALOG, run

from tristock.circuits import TOPOLOGIES

SPEC = (
    "[spec.supply]\npositive_v = {vp}\nnegative_v = {vn}\n"
    "[spec.frequency]\ntarget_hz = 1000.0\ntolerance_pct = 5.0\n"
    "[spec.triangle]\namplitude_vpp = 2.0\ntolerance_pct = 10.0\n"
)


def design_file(tmp_path: Path, name: str) -> Path:
    """A DESIGN file of ``name``'s demo board (its topology's own ``demo_board``)."""
    t = TOPOLOGIES[name]
    vp, vn = t.demo_rails
    parts = "".join(f'{d} = "{code}"\n' for d, code in t.demo_board.items())
    path = tmp_path / f"{name}.toml"
    path.write_text(f'topology = "{name}"\n[parts]\n{parts}' + SPEC.format(vp=vp, vn=vn))
    return path


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_every_circuit_is_analysed_simulated_and_exported(tmp_path: Path, name: str) -> None:
    path = design_file(tmp_path, name)
    t = TOPOLOGIES[name]
    analysed = run("analyse", path, "--catalog", DEMO_CATALOG, "--samples", "500", "--json")
    assert analysed.code == 0, analysed.err
    predicted = json.loads(analysed.out)["predicted"]
    simulated = run(
        "simulate", path, "--catalog", DEMO_CATALOG, "--periods", "4", "--json",
        "--max-points", "16",
    )  # fmt: skip
    assert simulated.code == 0, simulated.err
    sim = json.loads(simulated.out)
    # the time-domain simulation of the same board (tristock.simulate) agrees with the model
    # to the topology's stated accuracy
    assert sim["predicted"]["frequency_hz"] == pytest.approx(predicted["frequency_hz"], 1e-12)
    assert abs(sim["difference"]["frequency_rel"]) < t.accuracy
    assert abs(sim["difference"]["amplitude_rel"]) < t.accuracy
    bom = run("export", "bom", path, "--catalog", DEMO_CATALOG, "--json")
    assert bom.code == 0, bom.err
    rows = json.loads(bom.out)["rows"]
    placed = sorted(d for r in rows for d in r["designators"].split())
    assert placed == sorted(t.demo_board)  # every designator on one BOM line, once
    spice = run("export", "spice", path, "--catalog", DEMO_CATALOG)
    assert spice.code == 0, spice.err
    assert f"topology {name}" in spice.out and spice.out.rstrip().endswith(".end")


def test_the_comparator_example_finds_proven_designs_of_its_circuit() -> None:
    topology = "comparator_schmitt"
    done = run("design", "--example", "comparator", "--json", "--quiet")
    assert done.code == 0, done.err
    result = json.loads(done.out)
    assert result["search"]["proven_optimal"]
    assert result["candidates"], result.get("infeasible")
    assert {c["topology"] for c in result["candidates"]} == {topology}
    assert all(c["design_file"]["topology"] == topology for c in result["candidates"])


def test_a_variant_answer_saved_is_read_back(tmp_path: Path) -> None:
    target = tmp_path / "rank1.toml"
    saved = run("design", "--example", "comparator", "--save", "1", target, "--quiet")
    assert saved.code == 0, saved.err
    assert 'topology = "comparator_schmitt"' in target.read_text(encoding="utf-8")
    analysed = run("analyse", target, "--catalog", DEMO_CATALOG, "--samples", "500")
    assert analysed.code == 0, analysed.err
    assert "U2" in analysed.out


def test_a_duty_band_at_50_percent_is_refused_in_one_line(tmp_path: Path) -> None:
    spec = tmp_path / "spec.toml"
    body = SPEC.replace("[spec.", "[").format(vp=12.0, vn=-12.0)
    spec.write_text(f"[circuit]\nduty_tolerance_pct = 3\n{body}")
    done = run("design", spec, "--catalog", DEMO_CATALOG)
    assert done.code == 2
    assert "circuit.duty_tolerance_pct" in done.err and "not searched" in done.err
    assert len(done.err.strip().splitlines()) == 1


def test_the_duty_example_is_searched_and_proven() -> None:
    """``--example duty``: R3A, R3B and the duty in the table, every answer inside the duty
    band (the example's 20 ± 2 %), proven."""
    done = run("design", "--example", "duty", "--json")
    assert done.code == 0, done.err
    result = json.loads(done.out)
    assert result["search"]["proven_optimal"]
    assert result["candidates"]
    for c in result["candidates"]:
        assert c["topology"] == "duty_schmitt"
        assert {"R3A", "R3B", "D3", "D4"} <= set(c["parts"])
        assert 0.18 <= c["predicted"]["duty_high"] <= 0.22
    table = run("design", "--example", "duty", "--quiet")
    assert table.code == 0, table.err
    assert "R3A" in table.out and "duty" in table.out


def test_a_set_duty_board_is_reoptimised_without_its_diode(tmp_path: Path) -> None:
    """The set-duty demo board with its steering diode withdrawn: D3 and D4 change together
    (one code, the form's stage options), proven (brute force:
    tests/designs/test_duty_search_exact.py)."""
    path = design_file(tmp_path, "duty_schmitt")
    gone = TOPOLOGIES["duty_schmitt"].demo_board["D3"]
    done = run("reoptimise", path, "--catalog", DEMO_CATALOG, "--without", gone, "--json")
    assert done.code == 0, done.err
    result = json.loads(done.out)
    assert result["search"]["proven_optimal"]
    assert result["candidates"], result["infeasible"]
    for c in result["candidates"]:
        assert c["topology"] == "duty_schmitt" and {"D3", "D4"} <= set(c["changed"])
        assert c["parts"]["D3"]["id"] == c["parts"]["D4"]["id"] != gone


def test_a_saved_comparator_answer_is_reoptimised_without_its_r3(tmp_path: Path) -> None:
    """The comparator example's rank 1 saved as a DESIGN file (``topology`` key), its R3
    withdrawn: the answers change R3 alone (one position can change: the others keep their
    parts, each answer is a board of the same circuit), proven."""
    target = tmp_path / "rank1.toml"
    saved = run("design", "--example", "comparator", "--save", "1", target, "--quiet")
    assert saved.code == 0, saved.err
    before = run("analyse", target, "--catalog", DEMO_CATALOG, "--samples", "200", "--json")
    parts = json.loads(before.out)["parts"]
    gone = parts["R3"]["id"]
    done = run(
        "reoptimise", target, "--catalog", DEMO_CATALOG, "--without", gone, "--json", "--quiet"
    )
    assert done.code == 0, done.err
    result = json.loads(done.out)
    assert result["search"]["proven_optimal"]
    assert not result["original"]["passes"]
    assert result["candidates"]
    for c in result["candidates"]:
        assert c["topology"] == "comparator_schmitt" and c["changed"] == ["R3"]
        assert c["parts"]["R3"]["id"] != gone
        kept = {d: p["id"] for d, p in c["parts"].items() if d != "R3"}
        assert kept == {d: p["id"] for d, p in parts.items() if d != "R3"}
