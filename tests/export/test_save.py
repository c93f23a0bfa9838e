"""``tristock design --save`` / ``--save-all``: DESIGN files that analyse, simulate and
reoptimise read as they are, with the same prediction as the search's answer (round trips
through the commands; the reference is the search's own candidate)."""

from __future__ import annotations

import contextlib
import io
import json
import tomllib
from pathlib import Path

import pytest

from tristock.cli import main
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.export.saving import toml_text

DEMO = demo_catalog_dir()


def tristock(*argv: str | Path) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def saved(tmp_path_factory: pytest.TempPathFactory) -> tuple[dict, Path]:
    """The demo's top 3 as JSON, rank 2 saved as JSON, every rank saved as TOML."""
    folder = tmp_path_factory.mktemp("saved")
    code, out, err = tristock(
        "design",
        "--example",
        "--top",
        "3",
        "--json",
        "--save",
        "2",
        folder / "two.json",
        "--save-all",
        folder,
    )
    assert code == 0, err
    return json.loads(out), folder


def test_save_writes_the_candidates_design_file(saved: tuple[dict, Path]) -> None:
    answer, folder = saved
    two = json.loads((folder / "two.json").read_text(encoding="utf-8"))
    assert two == answer["candidates"][1]["design_file"]
    assert two["parts"] == {k: v["id"] for k, v in answer["candidates"][1]["parts"].items()}
    for c in answer["candidates"]:
        toml = tomllib.loads((folder / f"rank-{c['rank']}.toml").read_text(encoding="utf-8"))
        assert toml["parts"] == c["design_file"]["parts"]
        assert toml["spec"]["frequency"] == c["design_file"]["spec"]["frequency"]


@pytest.mark.parametrize("name", ["two.json", "rank-1.toml"])
def test_analyse_reads_a_saved_design_and_predicts_the_same(
    saved: tuple[dict, Path], name: str
) -> None:
    answer, folder = saved
    rank = 2 if name == "two.json" else 1
    code, out, err = tristock("analyse", folder / name, "--catalog", DEMO, "--json")
    assert code == 0, err
    predicted = answer["candidates"][rank - 1]["predicted"]
    got = json.loads(out)["predicted"]
    for key in ("frequency_hz", "amplitude_vpp", "duty_high"):
        assert got[key] == pytest.approx(predicted[key], rel=1e-12)


def test_simulate_and_reoptimise_read_a_saved_design(saved: tuple[dict, Path]) -> None:
    _, folder = saved
    code, out, err = tristock("simulate", folder / "rank-1.toml", "--catalog", DEMO, "--json")
    assert code == 0, err
    assert json.loads(out)["measured"]["frequency_hz"] > 0
    code, out, err = tristock(
        "reoptimise", folder / "rank-1.toml", "--catalog", DEMO, "--top", "1", "--json"
    )
    assert code == 0, err
    assert json.loads(out)["original"]["passes"] is True


def test_trimmed_design_is_saved_at_its_nominal_wiper(tmp_path: Path) -> None:
    code, out, err = tristock(
        "design", "--example", "trimmed", "--top", "1", "--json", "--save", "1", tmp_path / "t.toml"
    )
    assert code == 0, err
    best = json.loads(out)["candidates"][0]
    saved = tomllib.loads((tmp_path / "t.toml").read_text(encoding="utf-8"))
    assert saved["wiper"] == best["trim"]["wiper_nominal"] and "RV1" in saved["parts"]
    code, out, err = tristock("analyse", tmp_path / "t.toml", "--catalog", DEMO, "--json")
    assert code == 0, err
    assert json.loads(out)["predicted"]["frequency_hz"] == pytest.approx(
        best["predicted"]["frequency_hz"], rel=1e-12
    )


def test_tuned_design_is_saved_at_mid_dial_and_an_edge_board_is_one_line(tmp_path: Path) -> None:
    # The tuned example's rank 1 uses a divider control: at wiper 0 its drive nearly vanishes
    # and the loop sits at the edge of oscillating, so the file is saved at mid dial.
    path = tmp_path / "t.toml"
    code, _, err = tristock("design", "--example", "tuned", "--top", "1", "--save", "1", path)
    assert code == 0, err
    text = path.read_text(encoding="utf-8")
    assert tomllib.loads(text)["wiper"] == 0.5
    code, out, err = tristock("analyse", path, "--catalog", DEMO, "--json")
    assert code == 0, err
    assert json.loads(out)["predicted"]["frequency_hz"] > 0
    path.write_text(text.replace("wiper = 0.5", "wiper = 0.0"), encoding="utf-8")
    code, out, err = tristock("analyse", path, "--catalog", DEMO)
    assert code == 1 and out == ""
    assert len(err.strip().splitlines()) == 1
    assert "cannot oscillate" in err or "edge of oscillating" in err


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        (["--save", "0", "x.toml"], "--save: N must be a rank from 1"),
        (["--save", "1", "x.txt"], "must end in .toml or .json"),
        (["--save", "1", "no/such/folder/x.toml"], "no such folder"),
        (["--save-all", "no/such/folder"], "--save-all: folder"),
    ],
)
def test_bad_save_targets_are_one_line_before_the_search(argv: list[str], words: str) -> None:
    code, out, err = tristock("design", "--example", *argv)
    assert code == 2 and out == ""
    assert words in err and len(err.strip().splitlines()) == 1


def test_save_of_a_rank_not_found_says_how_many(tmp_path: Path) -> None:
    code, _, err = tristock("design", "--example", "--top", "2", "--save", "5", tmp_path / "x.json")
    assert code == 2 and "only 2 designs were found" in err
    assert not (tmp_path / "x.json").exists()


def test_toml_text_round_trips_nested_tables_and_leaves_out_none() -> None:
    data = {"a": 1, "b": None, "t": {"x": [1.5, 2.0], "s": 'q"é', "u": {"v": True}}}
    assert tomllib.loads(toml_text(data)) == {
        "a": 1,
        "t": {"x": [1.5, 2.0], "s": 'q"é', "u": {"v": True}},
    }


def test_example_spec_is_saved_with_the_spec_it_was_searched_with(
    saved: tuple[dict, Path],
) -> None:
    answer, _ = saved
    assert example_spec_path("demo").exists()
    assert answer["candidates"][0]["design_file"]["spec"] == answer["spec"]
