"""The registry's commands end to end on a copy of the demo catalog, on SQLite and
PostgreSQL: release, designs list|show|diff|plan|retire|accept, impact, and their exit codes
(README's table: 0 done, 1 unreachable database, 2 bad input, 3 a design failing its spec)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import pytest

from tristock.cli import main
from tristock.examples import demo_catalog_dir

DEMO_DESIGN = {"U1": "GA-JF2", "R1": "R0B-21K5", "R2": "R1F-78K7", "R3": "R1F-158K",
               "C1": "CPPG-2N20"}  # fmt: skip


@pytest.fixture
def shop(tmp_path: Path) -> Path:
    target = tmp_path / "shop"
    shutil.copytree(demo_catalog_dir(), target)
    return target


def demo_design_file(folder: Path, **parts: str) -> Path:
    from tristock.examples import example_spec_path
    from tristock.spec.loading import load_spec

    spec = load_spec(example_spec_path("demo")).model_dump(mode="json")
    path = folder / "demo-design.json"
    path.write_text(json.dumps({"spec": spec, "parts": {**DEMO_DESIGN, **parts}}))
    return path


def tristock(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_release_show_plan_diff_retire(
    registry_url: str, shop: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    where = ["--catalog", str(shop), "--db", registry_url]
    design = demo_design_file(tmp_path)
    code, out, _ = tristock(capsys, "release", str(design), "--name", "bench", "--boards", "50",
                            "--note", "first build", *where, "--json")  # fmt: skip
    assert code == 0
    rev = json.loads(out)
    assert (rev["name"], rev["revision"], rev["boards"], rev["kind"]) == ("bench", 1, 50, "fixed")
    assert rev["design"]["parts"] == DEMO_DESIGN
    assert rev["spec"]["build"]["boards"] == 50
    assert 0.98 < rev["analysis"]["predicted"]["frequency_hz"] / 2500 < 1.02  # the demo's band
    code, out, _ = tristock(capsys, "designs", "plan", "bench", "--boards", "80", *where)
    assert code == 0 and "bench@2: planned build 80 boards" in out
    code, out, _ = tristock(capsys, "designs", "diff", "bench@1", "bench@2", *where, "--json")
    d = json.loads(out)
    assert d["boards"] == {"field": "boards", "before": 50, "after": 80} and d["parts"] == []
    code, out, _ = tristock(capsys, "designs", "show", "bench@1", *where, "--design-file")
    assert json.loads(out)["parts"] == DEMO_DESIGN
    code, out, _ = tristock(capsys, "designs", "list", *where)
    assert code == 0 and "bench" in out and "80" in out
    assert tristock(capsys, "designs", "retire", "bench", *where)[0] == 0
    code, out, _ = tristock(capsys, "designs", "list", *where)
    assert "no released designs" in out
    code, _, err = tristock(capsys, "release", str(design), "--name", "bench", *where)
    assert code == 2 and "retired" in err


def test_impact_and_accept(
    registry_url: str, shop: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """Two designs share the demo's C1 code; its stock covers one build; one changes."""
    where = ["--catalog", str(shop), "--db", registry_url]
    design = demo_design_file(tmp_path)
    for name in ("bench-a", "bench-b"):
        assert (
            tristock(capsys, "release", str(design), "--name", name, "--boards", "40", *where)[0]
            == 0
        )
    code, out, _ = tristock(capsys, "impact", *where)
    assert code == 0 and "nothing is over-subscribed" in out
    what_if = tmp_path / "short.csv"
    what_if.write_text("# the shelf after a count\nid,stock\nCPPG-2N20,50\n")
    code, out, _ = tristock(capsys, "impact", "--what-if", str(what_if), *where, "--json")
    report: dict[str, Any] = json.loads(out)
    assert code == 0
    assert [o["id"] for o in report["over_subscribed"]] == ["CPPG-2N20"]
    assert [a["name"] for a in report["affected"]] == ["bench-a", "bench-b"]
    proposal = report["proposal"]
    assert proposal["proven"] and proposal["total_changes"] == 1
    changed = [d for d in proposal["designs"] if d["changed"]]
    assert len(changed) == 1 and changed[0]["changed"] == ["C1"]
    assert (shop / "capacitors.csv").read_text().count("CPPG-2N20,") == 1  # tables untouched
    proposal_file = tmp_path / "proposal.json"
    proposal_file.write_text(out)
    name = changed[0]["name"]
    code, out, _ = tristock(capsys, "designs", "accept", name, "--proposal", str(proposal_file),
                            *where, "--json")  # fmt: skip
    assert code == 0
    accepted = json.loads(out)
    assert accepted["revision"] == 2 and accepted["source"] == "accept"
    assert accepted["design"]["parts"]["C1"] == changed[0]["design_after"]["parts"]["C1"]
    code, _, err = tristock(capsys, "designs", "accept", name, "--proposal", str(proposal_file),
                            *where)  # fmt: skip
    assert code == 2 and "made for revision 1, the latest is 2" in err


TUNED_DESIGN = {"U1": "GA-JF2", "R1": "R5J-2K40", "R2": "R1F-8K87", "R3": "R1F-976K",
                "R4": "R5J-1K00", "RV1": "VP-100K", "C1": "CC0-1N50", "C2": "CC0-150P"}  # fmt: skip


def test_a_tuned_design_is_released_and_re_solved(
    shop: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The bundled tuned example's rank 1 goes through the same path (SQLite only: the
    backends are covered above): released, then its R1 made short by a what-if; the proposal
    changes R1 alone, proven minimal, to a code whose stock covers the build."""
    from tristock.examples import example_spec_path
    from tristock.spec.loading import load_spec

    where = ["--catalog", str(shop), "--db", str(tmp_path / "registry.sqlite")]
    spec = load_spec(example_spec_path("tuned")).model_dump(mode="json")
    design = tmp_path / "tuned-design.json"
    design.write_text(json.dumps({"spec": spec, "parts": TUNED_DESIGN, "range": "C1"}))
    code, out, _ = tristock(capsys, "release", str(design), "--name", "panel", "--boards", "20",
                            *where, "--json")  # fmt: skip
    assert code == 0 and json.loads(out)["kind"] == "tuned"
    what_if = tmp_path / "short.csv"
    what_if.write_text("id,stock\nR5J-2K40,10\n")
    code, out, _ = tristock(capsys, "impact", "--what-if", str(what_if), *where, "--json")
    proposal = json.loads(out)["proposal"]
    assert code == 0 and proposal["proven"] and proposal["total_changes"] == 1
    (changed,) = [d for d in proposal["designs"] if d["changed"]]
    assert changed["changed"] == ["R1"]
    new_r1 = changed["design_after"]["parts"]["R1"]
    stock = {row.split(",")[0]: row for row in (shop / "resistors.csv").read_text().splitlines()}
    assert new_r1 != "R5J-2K40" and new_r1 in stock


def test_exit_codes_of_bad_input_and_faults(
    registry_url: str, shop: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    where = ["--catalog", str(shop), "--db", registry_url]
    code, _, err = tristock(capsys, "designs", "show", "nobody", *where)
    assert code == 2 and err.strip() == "tristock designs show: no released design named 'nobody'"
    failing = demo_design_file(tmp_path, R3="R1F-100K")  # 1.58x the frequency: out of band
    code, _, err = tristock(capsys, "release", str(failing), "--name", "bad", *where)
    assert code == 3 and "does not meet its spec" in err and len(err.strip().splitlines()) == 1
    assert tristock(capsys, "designs", "list", *where, "--json")[1].strip() == "[]"
    bad_csv = tmp_path / "bad.csv"
    bad_csv.write_text("id,stock\nCPPG-2N20,many\n")
    code, _, err = tristock(capsys, "impact", "--what-if", str(bad_csv), *where)
    assert code == 2 and f"{bad_csv}:2: stock: expected a whole number" in err
    code, _, err = tristock(capsys, "release", str(failing), "--name", "no name", *where)
    assert code == 2 and "letters, digits" in err
    gone = "postgresql+psycopg://x@/x?host=/nonexistent-socket-dir&port=1"
    code, _, err = tristock(capsys, "designs", "list", "--db", gone)
    assert code == 1 and err.startswith("tristock designs list: registry ") and err.count("\n") == 1


BAD_VALUES = ["0", "-1", "abc", "", "nan", "inf", "1e9", "10000001", "65", " 3", "x@y", "a b"]
REGISTRY_OPTIONS = {
    ("release", "DESIGN", "--name", "n1"): ["--boards", "--rank", "--name", "--note"],
    ("designs", "plan", "n1"): ["--boards"],
    ("designs", "show"): [],
    ("impact",): ["--workers", "--time-limit", "--top", "--what-if"],
}


@pytest.mark.parametrize("value", BAD_VALUES)
@pytest.mark.parametrize("head", list(REGISTRY_OPTIONS), ids=" ".join)
def test_bad_option_values_are_one_line(
    head: tuple[str, ...],
    value: str,
    shop: Path,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """Every bad value: exit 2 (bad input) or 1 (no registry yet for `impact`), one line on
    stderr, no traceback, no database left half made (common practice)."""
    design = demo_design_file(tmp_path)
    argv = [str(design) if a == "DESIGN" else a for a in head]
    options = REGISTRY_OPTIONS[head]
    db = tmp_path / "r.sqlite"
    for option in options or [None]:
        line = [*argv, *([option, value] if option else [value])]
        code, _, err = tristock(capsys, *line, "--catalog", str(shop), "--db", str(db))
        assert code in (0, 1, 2, 3), line
        assert err.count("\n") <= 1 and "Traceback" not in err, (line, err)
