"""Readable output: the 100-column table (a snapshot), its legend and flags, distinct designs
and ``--all-variants``, ``--explain``, ``--quiet``, ``sketch``, progress only on a terminal,
reoptimise's before and after, and an example and the exit codes in every ``--help``."""

from __future__ import annotations

import json
import os
import pty
import select
import subprocess
import sys
import time
from functools import cache
from pathlib import Path

import pytest
from cli_helpers import DEMO_CATALOG, REPO, SMALL_CATALOG, SMALL_SPEC, run, run_process

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import resolve
from tristock.cli.parser import build_parser
from tristock.designs.variants import variant_key
from tristock.stock.catalog import load_catalog

SNAPSHOT = Path(__file__).parent / "snapshots" / "demo_table.txt"
#: Longer than the default 5 s, so that a busy machine cannot cut the search short.
LIMIT = ("--time-limit", "120")


@cache
def demo_text() -> str:
    got = run("design", "--example", *LIMIT)
    assert got.code == 0, got.err
    return got.out


def test_the_default_output_fits_100_columns_and_the_table_is_the_snapshot() -> None:
    """The snapshot is the demo's table as the README shows it; regenerate it (and the
    README) only for an intended change: ``tristock design --example --quiet``."""
    text = demo_text()
    assert max(len(line) for line in text.splitlines()) <= 100
    quiet = run("design", "--example", "--quiet", *LIMIT)
    assert quiet.code == 0 and quiet.err == ""
    assert quiet.out == SNAPSHOT.read_text(encoding="utf-8")
    assert quiet.out in text  # the quiet answer is the table, as in the full output
    assert quiet.out in (REPO / "README.md").read_text(encoding="utf-8")


def test_the_legend_names_every_column_and_the_catalogs_currency(tmp_path: Path) -> None:
    text = demo_text()
    legend = text[text.index("legend:") :].split("\n\n")[0]
    words_wanted = (
        "f: full model", "err:", "Vpp:", "worst-case f:", "yield: boards into both",
        "4,000 Monte Carlo samples", "cost: per board, EUR", "flag:", "also:",
    )  # fmt: skip
    for words in words_wanted:
        assert words in " ".join(legend.split()), words
    spec = tmp_path / "small.json"
    spec.write_text(json.dumps(SMALL_SPEC), encoding="utf-8")
    small = run("design", "--catalog", SMALL_CATALOG, spec, "--top", "1")  # no catalog.toml
    assert small.code == 0, small.err
    assert "per board, currency units" in " ".join(small.out.split())


def test_each_row_is_flagged_by_its_findings() -> None:
    got = run("design", "--example", "--json", *LIMIT)
    rows = [line for line in demo_text().splitlines() if line[:2].strip().isdigit()]
    answers = json.loads(got.out)["candidates"]
    assert len(rows) == len(answers) == 10
    for row, c in zip(rows, answers, strict=True):
        severities = {w["severity"] for w in c["warnings"]}
        want = "!" if "error" in severities else "*" if severities else " "
        if want == " ":
            assert row.rstrip()[-1].isdigit(), row  # ends with the cost
        else:
            assert row.rstrip().endswith(" " + want), row


def test_the_top_10_are_distinct_and_all_variants_gives_the_plain_list() -> None:
    catalog = load_catalog(DEMO_CATALOG)
    distinct = json.loads(run("design", "--example", "--json", *LIMIT).out)
    every = json.loads(run("design", "--example", "--json", "--all-variants", *LIMIT).out)
    assert distinct["search"]["distinct"] and not every["search"]["distinct"]
    keys = [
        variant_key(resolve(c["design_file"]["parts"], catalog)) for c in distinct["candidates"]
    ]
    assert len(set(keys)) == 10  # no two variants of one design
    plain = [c["design_file"]["parts"] for c in every["candidates"]]
    assert all(not c["variants"] for c in every["candidates"])
    assert len({variant_key(resolve(p, catalog)) for p in plain}) < 10  # the demo has variants
    listed = {v["rank_all"]: v["parts"] for c in distinct["candidates"] for v in c["variants"]}
    for rank, parts in listed.items():  # each variant sits at its place in the plain list
        if rank <= len(plain):
            assert plain[rank - 1] == parts
    assert "    also: #" in demo_text()


def test_explain_prints_the_findings_sensitivities_and_sketch() -> None:
    got = run("design", "--example", "--explain", "3", *LIMIT)
    assert got.code == 0, got.err
    block = got.out[got.out.index("Design 3 explained") :]
    assert "findings:" in block and "sensitivities" in block and "sketch:" in block
    assert "R3 " in block and "U1A" in block  # a sensitivity row and the sketch's designators
    assert max(len(line) for line in got.out.splitlines()) <= 100
    too_far = run("design", "--example", "--top", "2", "--explain", "3")
    assert too_far.code == 2 and "--explain 3" in too_far.err


def test_sketch_prints_every_registered_topology_and_refuses_an_unknown_one() -> None:
    for name, topology in TOPOLOGIES.items():
        got = run("sketch", "--circuit", name)
        assert got.code == 0 and topology.sketch.strip().splitlines()[0] in got.out
        for designator in topology.required:
            assert f"  {designator} " in got.out
    bad = run("sketch", "--circuit", "no-such")
    assert bad.code == 2 and bad.out == ""
    assert len(bad.err.strip().splitlines()) == 1 and "opamp_schmitt" in bad.err


def test_analyse_shows_the_sketch(tmp_path: Path) -> None:
    saved = tmp_path / "r1.toml"
    assert run("design", "--example", "--save", "1", saved, "--quiet").code == 0
    got = run("analyse", saved, "--catalog", DEMO_CATALOG, "--samples", "500")
    assert got.code == 0 and "Sketch:" in got.out and "U1B" in got.out
    assert "(dual)" in got.out and "GA-JF2 (GA-JF2" not in got.out


def test_reoptimise_shows_yield_and_worst_case_before_and_after(tmp_path: Path) -> None:
    saved = tmp_path / "r1.toml"
    assert run("design", "--example", "--save", "1", saved, "--quiet").code == 0
    got = run("reoptimise", saved, "--catalog", DEMO_CATALOG, "--without", "CPPG-2N20")
    assert got.code == 0, got.err
    assert "before    f 2.5005 kHz" in got.out and "yield 98.0 %" in got.out
    lines = got.out.splitlines()
    y = next(line for line in lines if line.strip().startswith("yield"))
    wc = next(line for line in lines if line.strip().startswith("worst-case f"))
    assert "98.0 % ->" in y and "kHz ->" in wc


def test_no_progress_on_a_pipe_and_progress_on_a_terminal() -> None:
    piped = run_process("design", "--example", "--top", "2")
    assert piped.code == 0 and piped.err == ""  # stderr is a pipe: nothing at all
    primary, secondary = pty.openpty()
    proc = subprocess.Popen(
        [sys.executable, "-m", "tristock.cli", "design", "--example", "--top", "2"],
        stdout=subprocess.PIPE,
        stderr=secondary,
        env={**os.environ, "TERM": "xterm"},
    )
    os.close(secondary)
    seen = b""
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        ready, _, _ = select.select([primary], [], [], 0.2)
        if ready:
            try:
                chunk = os.read(primary, 4096)
            except OSError:  # the terminal closed with the process
                break
            if not chunk:
                break
            seen += chunk
        elif proc.poll() is not None:
            break
    out, _ = proc.communicate(timeout=120)
    os.close(primary)
    assert proc.returncode == 0
    assert b"searching" in seen  # the spinner's text, on the terminal only
    assert b"searching" not in out
    quiet = subprocess.run(
        [sys.executable, "-m", "tristock.cli", "design", "--example", "--top", "1", "--quiet"],
        capture_output=True,
        timeout=120,
    )
    assert quiet.returncode == 0 and quiet.stderr == b""
    assert quiet.stdout.decode().splitlines()[0].lstrip().startswith("#")


def _subcommands(parser: object) -> list[tuple[str, object]]:
    import argparse

    out = []
    assert isinstance(parser, argparse.ArgumentParser)
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                out.append((name, sub))
                out += [(f"{name} {n}", s) for n, s in _subcommands(sub)]
    return out


@pytest.mark.parametrize("name", [n for n, _ in _subcommands(build_parser())])
def test_every_help_has_an_example_and_the_exit_codes(name: str) -> None:
    sub = dict(_subcommands(build_parser()))[name]
    text = sub.format_help()  # type: ignore[attr-defined]
    assert "example:\n  tristock " in text, name
    assert "exit codes:" in text and "130" in text, name
