"""The command starts light: ``--help`` and a fixed design never load the heavy libraries
they do not use (OR-Tools only when CP-SAT runs, scipy.stats nowhere on these paths; issue 15,
target 5). Checked in a fresh interpreter through ``sys.modules``, not by timing."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

HEAVY = ("ortools", "scipy.stats", "pandas", "fastapi", "sqlalchemy", "dask", "matplotlib")

LOADED_AFTER = textwrap.dedent(
    """
    import contextlib, io, json, sys
    import tristock.cli
    from tristock.cli.app import main
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        try:
            code = main(sys.argv[1:])
        except SystemExit as done:
            code = done.code
    print(json.dumps({"code": code, "modules": sorted(sys.modules), "out": out.getvalue()}))
    """
)


def _loaded(*argv: str) -> tuple[int, set[str], str]:
    proc = subprocess.run(
        [sys.executable, "-c", LOADED_AFTER, *argv],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert proc.returncode == 0, proc.stderr
    report = json.loads(proc.stdout.splitlines()[-1])
    return int(report["code"] or 0), set(report["modules"]), str(report["out"])


def _heavy(modules: set[str]) -> list[str]:
    return sorted(m for m in modules if any(m == h or m.startswith(h + ".") for h in HEAVY))


def test_help_loads_no_heavy_library() -> None:
    code, modules, out = _loaded("--help")
    assert code == 0
    assert "design" in out  # the help text was printed
    assert _heavy(modules) == []
    assert "numpy" not in modules  # --help loads no part of the library either


def test_fixed_design_loads_no_heavy_library() -> None:
    code, modules, out = _loaded("design", "--example", "--top", "2")
    assert code == 0
    assert "GA-" in out  # a design table with the demo's op amps was printed
    assert _heavy(modules) == []


def test_cpsat_engine_loads_ortools_on_use() -> None:
    code, modules, _ = _loaded("design", "--example", "--top", "2", "--engine", "cpsat")
    assert code == 0
    assert "ortools.sat.python.cp_model" in modules
