"""One test per CLI finding: each input that used to end in a traceback or a useless exit code
now ends in one line and a documented code (0 answers, 1 failed, 2 bad input, 3 no design,
130 interrupted)."""

from __future__ import annotations

import errno
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from cli_helpers import (
    DEMO_CATALOG,
    SMALL_CATALOG,
    SMALL_SPEC,
    assert_clean,
    demo_parts,
    latching_parts,
    run,
    run_process,
    strict_json,
    write_design,
)

from tristock.cli import design as design_command
from tristock.cli import exits
from tristock.cli.common import PLOT_SUFFIXES
from tristock.cli.output import json_text
from tristock.designs import design
from tristock.designs.fixed import DEFAULT_TIME_LIMIT_S
from tristock.report.plot import FORMATS
from tristock.spec import limits
from tristock.spec.loading import parse_spec
from tristock.stock.catalog import load_catalog


@pytest.fixture(autouse=True)
def _crash_logs_in_tmp(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("XDG_STATE_HOME", str(tmp_path / "state"))


def one_line(r_err: str) -> str:
    lines = r_err.strip().splitlines()
    assert len(lines) == 1, r_err
    return lines[0]


# ---- options out of range: exit 2, one line naming the option ---------------------------


@pytest.mark.parametrize(
    ("argv", "option"),
    [
        (["design", "--example", "--top", "0"], "--top"),
        (["design", "--example", "--top", "101"], "--top"),
        (["design", "--example", "--time-limit", "0"], "--time-limit"),
        (["design", "--example", "--time-limit", "-1"], "--time-limit"),
        (["design", "--example", "--time-limit", "nan"], "--time-limit"),
        (["design", "--example", "--time-limit", "inf"], "--time-limit"),
        (["design", "--example", "--time-limit", "3601"], "--time-limit"),
        (["analyse", "d.json", "--catalog", "c", "--samples", "0"], "--samples"),
        (["analyse", "d.json", "--catalog", "c", "--samples", "100000000"], "--samples"),
        (["analyse", "d.json", "--catalog", "c", "--seed", "-1"], "--seed"),
        (["analyse", "d.json", "--catalog", "c", "--seed", "4294967296"], "--seed"),
        (["simulate", "d.json", "--catalog", "c", "--periods", "0"], "--periods"),
        (["simulate", "d.json", "--catalog", "c", "--periods", "201"], "--periods"),
        (["simulate", "d.json", "--catalog", "c", "--max-points", "15"], "--max-points"),
        (["reoptimise", "d.json", "--catalog", "c", "--boards", "0"], "--boards"),
        (["reoptimise", "d.json", "--catalog", "c", "--top", "many"], "--top"),
        (["catalog", "set-stock", "c", "R1", "-5"], "COUNT"),
        (["catalog", "set-stock", "c", "R1", "1000000001"], "COUNT"),
        (["serve", "--port", "70000"], "--port"),
        (["serve", "--workers", "0"], "--workers"),
    ],
)
def test_option_out_of_range_is_one_line_exit_2(argv: list[str], option: str) -> None:
    r = run(*argv)
    assert r.code == exits.BAD_INPUT and r.out == ""
    assert option in one_line(r.err)
    assert "Traceback" not in r.err


def test_ranges_are_the_api_ranges() -> None:
    """The API's request limits (api/schemas.py, api/settings.py) are the same numbers."""
    from tristock.api import settings

    assert limits.SAMPLES[1] == settings.MAX_SAMPLES
    assert limits.PERIODS[1] == settings.MAX_PERIODS
    assert limits.MAX_POINTS[1] == settings.MAX_POINTS
    assert limits.STOCK[1] == settings.MAX_STOCK
    assert limits.TOP[1] >= settings.MAX_TOP  # the service may only lower a ceiling
    assert limits.DEFAULT_TIME_LIMIT_S == DEFAULT_TIME_LIMIT_S
    assert set(PLOT_SUFFIXES) == set(FORMATS)


# ---- plots: checked before any work -------------------------------------------------------


@pytest.mark.parametrize("name", ["out.jpg", "out", "/missing/dir/w.png"])
def test_simulate_plot_name_is_checked_first(tmp_path: Path, name: str) -> None:
    path = write_design(tmp_path / "d.json", demo_parts())
    r = run("simulate", path, "--catalog", DEMO_CATALOG, "--plot", name)
    assert r.code == exits.BAD_INPUT and "--plot" in one_line(r.err)


@pytest.mark.parametrize("name", ["out.jpg", "/missing/dir/w.png"])
def test_design_plot_name_is_checked_before_the_catalog_is_read(name: str) -> None:
    r = run("design", "--example", "tuned", "--plot", name, "--catalog", "/no/such/catalog")
    assert r.code == exits.BAD_INPUT and "--plot" in one_line(r.err)


def test_design_plot_of_a_fixed_spec_is_refused_before_the_search() -> None:
    r = run("design", "--example", "--plot", "dial.png", "--catalog", "/no/such/catalog")
    assert r.code == exits.BAD_INPUT and "[tuning]" in one_line(r.err)


# ---- broken spec files: exit 2 naming the file ---------------------------------------------


def test_spec_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "latin1.toml"
    path.write_bytes("[supply]\n# r\xe9glage\npositive_v = 12.0\n".encode("latin-1"))
    r = run("design", path, "--catalog", DEMO_CATALOG)
    line = one_line(r.err)
    assert r.code == exits.BAD_INPUT and str(path) in line and "not UTF-8" in line


@pytest.mark.parametrize(
    ("name", "text"),
    [
        ("deep.json", "[" * 5000 + "]" * 5000),
        ("deep2.json", '{"a":' * 5000 + "1" + "}" * 5000),
        ("deep.toml", "a = " + "[" * 5000 + "]" * 5000),
    ],
)
def test_spec_nested_5000_deep(tmp_path: Path, name: str, text: str) -> None:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    r = run("design", path, "--catalog", DEMO_CATALOG)
    line = one_line(r.err)
    assert r.code == exits.BAD_INPUT and str(path) in line


def test_spec_with_a_5000_digit_integer(tmp_path: Path) -> None:
    path = tmp_path / "digits.json"
    path.write_text('{"supply": {"positive_v": ' + "9" * 5000 + "}}", encoding="utf-8")
    r = run("design", path, "--catalog", DEMO_CATALOG)
    assert r.code == exits.BAD_INPUT and str(path) in one_line(r.err)


def test_spec_file_too_large(tmp_path: Path) -> None:
    path = tmp_path / "big.json"
    path.write_text(" " * (limits.SPEC_FILE_MAX_BYTES + 1) + "{}", encoding="utf-8")
    r = run("design", path, "--catalog", DEMO_CATALOG)
    assert r.code == exits.BAD_INPUT and "larger than" in one_line(r.err)


@pytest.mark.parametrize("amplitude", [5e-324, 1e-320])
def test_tiny_amplitude_is_refused_naming_the_field(tmp_path: Path, amplitude: float) -> None:
    spec = json.loads(json.dumps(SMALL_SPEC))
    spec["triangle"]["amplitude_vpp"] = amplitude
    path = tmp_path / "tiny.json"
    path.write_text(json.dumps(spec), encoding="utf-8")
    r = run("design", path, "--catalog", SMALL_CATALOG)
    line = one_line(r.err)
    assert r.code == exits.BAD_INPUT
    assert "triangle.amplitude_vpp" in line and "below 0.001 V" in line


def test_boolean_target_is_not_one_hertz(tmp_path: Path) -> None:
    spec = json.loads(json.dumps(SMALL_SPEC))
    spec["frequency"]["target_hz"] = True
    path = tmp_path / "bool.json"
    path.write_text(json.dumps(spec), encoding="utf-8")
    r = run("design", path, "--catalog", SMALL_CATALOG)
    line = one_line(r.err)
    assert r.code == exits.BAD_INPUT and "frequency.target_hz" in line and "boolean" in line


# ---- exit 3: no design meets the spec -----------------------------------------------------


def zero_stock_catalog(tmp_path: Path) -> Path:
    """The demo catalog with its resistors replaced by the README's `catalog generate` example,
    which writes every row with stock 0."""
    folder = tmp_path / "zero"
    shutil.copytree(DEMO_CATALOG, folder)
    (folder / "resistors.csv").unlink()
    r = run(
        "catalog", "generate", "--kind", "resistor", "--series", "E96", "--from", "10",
        "--to", "1M", "--tolerance", "1", "--tempco", "100", "-o", folder / "resistors.csv",
    )  # fmt: skip
    assert r.code == 0, r.err
    return folder


@pytest.mark.parametrize("example", ["demo", "trimmed", "tuned"])
def test_zero_stock_resistors_exit_3_with_reasons(tmp_path: Path, example: str) -> None:
    r = run("design", "--example", example, "--catalog", zero_stock_catalog(tmp_path))
    assert_clean(r, {exits.NO_DESIGN})
    assert "No design meets the spec" in r.out


def test_exit_3_still_writes_the_json(tmp_path: Path) -> None:
    r = run("design", "--example", "--catalog", zero_stock_catalog(tmp_path), "--json")
    assert_clean(r, {exits.NO_DESIGN})
    data = strict_json(r.out)
    assert data["candidates"] == [] and data["infeasible"]["reasons"]
    assert data["search"]["proven_optimal"] is True
    line = one_line(r.err)
    assert line.startswith("tristock design: no design meets the spec: ")
    assert data["infeasible"]["reasons"][0] in line


def test_reoptimise_with_no_design_exits_3(tmp_path: Path) -> None:
    path = write_design(tmp_path / "d.json", demo_parts())
    r = run("reoptimise", path, "--catalog", zero_stock_catalog(tmp_path), "--json")
    assert_clean(r, {exits.NO_DESIGN})
    assert strict_json(r.out)["infeasible"]["reasons"]


def test_exit_code_of_a_search_cut_short_is_1_not_3() -> None:
    """A search cut by its time limit before it found anything has not proven infeasibility."""
    result = design(parse_spec(SMALL_SPEC), load_catalog(SMALL_CATALOG))
    assert design_command.exit_code(result) == exits.OK
    empty = result.model_copy(update={"candidates": []})
    assert design_command.exit_code(empty) == exits.NO_DESIGN
    cut = empty.model_copy(
        update={"search": result.search.model_copy(update={"proven_optimal": False})}
    )
    assert design_command.exit_code(cut) == exits.FAILED
    assert "not proven" in design_command.render_design(cut)


# ---- exit 1: the work failed ---------------------------------------------------------------


@pytest.mark.parametrize("command", ["analyse", "simulate"])
def test_a_loop_that_cannot_oscillate_exits_1_with_the_reason(tmp_path: Path, command: str) -> None:
    path = write_design(tmp_path / "latch.json", latching_parts())
    r = run(command, path, "--catalog", DEMO_CATALOG)
    assert r.code == exits.FAILED and r.out == ""
    line = one_line(r.err)
    assert "cannot oscillate" in line or "does not oscillate" in line
    assert "V p-p" not in r.out


def test_broken_catalog_lists_every_problem_exit_1() -> None:
    broken = SMALL_CATALOG.parent / "broken_catalog"
    r = run("catalog", "check", broken)
    assert r.code == exits.FAILED
    lines = r.err.strip().splitlines()
    assert len(lines) >= 2 and all(".csv:" in line for line in lines)


def test_set_stock_on_a_full_disk_exits_1_and_leaves_the_table(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    folder = tmp_path / "cat"
    shutil.copytree(SMALL_CATALOG, folder)
    before = (folder / "resistors.csv").read_bytes()

    def disk_full(fd: int) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "fsync", disk_full)
    r = run("catalog", "set-stock", folder, "TR-1K00", "42")
    assert r.code == exits.FAILED, r.err
    assert "internal error" not in one_line(r.err)
    assert (folder / "resistors.csv").read_bytes() == before


def test_set_stock_unknown_id_is_bad_input(tmp_path: Path) -> None:
    folder = tmp_path / "cat"
    shutil.copytree(SMALL_CATALOG, folder)
    r = run("catalog", "set-stock", folder, "NO-SUCH-ID", "3")
    assert r.code == exits.BAD_INPUT and "NO-SUCH-ID" in one_line(r.err)


def test_an_unforeseen_error_writes_a_crash_log(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    def broken(args: object) -> int:
        return 1 // 0

    monkeypatch.setattr(design_command, "run", broken)
    r = run("design", "--example")
    line = one_line(r.err)
    assert r.code == exits.FAILED and "Traceback" not in r.err
    assert "internal error (ZeroDivisionError" in line
    log = Path(line.rsplit("details written to ", 1)[1])
    assert log.is_relative_to(tmp_path / "state" / "tristock")
    text = log.read_text(encoding="utf-8")
    assert "Traceback" in text and "1 // 0" in text and "'design', '--example'" in text


# ---- output: pipes, JSON, Ctrl-C -----------------------------------------------------------


class _ClosedPipe:
    """A stdout whose reader has gone."""

    def write(self, text: str) -> int:
        raise BrokenPipeError(errno.EPIPE, "Broken pipe")

    def flush(self) -> None:
        raise BrokenPipeError(errno.EPIPE, "Broken pipe")


def test_broken_pipe_ends_quietly_in_process(monkeypatch: pytest.MonkeyPatch) -> None:
    import io

    err = io.StringIO()
    monkeypatch.setattr(sys, "stdout", _ClosedPipe())
    monkeypatch.setattr(sys, "stderr", err)
    from tristock.cli import main

    assert main(["design", "--example", "--top", "1"]) == exits.OK
    assert err.getvalue() == ""


def test_broken_pipe_ends_quietly_as_a_process() -> None:
    """`tristock design --example | head -3`, the reader gone before the answer is written."""
    process = subprocess.Popen(
        [sys.executable, "-m", "tristock.cli", "design", "--example", "--top", "2"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    assert process.stdout is not None and process.stderr is not None
    process.stdout.close()  # the reader leaves before any output
    err = process.stderr.read().decode()
    assert process.wait(timeout=120) == exits.OK
    assert err == ""


def test_json_output_is_strict_even_with_non_finite_values() -> None:
    text = json_text({"a": float("nan"), "b": [float("inf"), -float("inf"), 1.5]})
    assert strict_json(text) == {"a": None, "b": [None, None, 1.5]}


def test_keyboard_interrupt_in_process_prints_interrupted_and_no_result(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    def interrupted(args: object) -> int:
        raise KeyboardInterrupt

    monkeypatch.setattr(design_command, "run", interrupted)
    r = run("design", "--example")
    assert r.code == exits.INTERRUPTED and r.out == ""
    assert one_line(r.err) == "tristock: interrupted"


def test_help_lists_the_exit_codes() -> None:
    for argv in (["--help"], ["design", "--help"], ["analyse", "--help"]):
        r = run(*argv)
        assert r.code == 0
        for code in ("0 ", "1 ", "2 ", "3 ", "130"):
            assert f"\n  {code}" in r.out
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    for code in ("`0`", "`1`", "`2`", "`3`", "`130`"):
        assert code in readme


def test_real_process_bad_input_is_one_line() -> None:
    r = run_process("design", "--example", "--top", "0")
    assert r.code == exits.BAD_INPUT and "--top" in one_line(r.err) and r.out == ""


def test_the_catalog_comes_from_tristock_catalog_when_not_given(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Without --catalog a command reads TRISTOCK_CATALOG (as `serve` does); with neither it
    is bad input naming both."""
    path = write_design(tmp_path / "d.json", demo_parts())
    monkeypatch.delenv("TRISTOCK_CATALOG", raising=False)
    r = run("analyse", path, "--samples", "200")
    assert r.code == exits.BAD_INPUT and "TRISTOCK_CATALOG" in one_line(r.err)
    monkeypatch.setenv("TRISTOCK_CATALOG", str(DEMO_CATALOG))
    with_env = run("analyse", path, "--samples", "200", "--json")
    given = run("analyse", path, "--samples", "200", "--json", "--catalog", DEMO_CATALOG)
    assert with_env.code == given.code == exits.OK
    assert json.loads(with_env.out) == json.loads(given.out)
