"""The command starts light: ``import tristock.cli`` and ``--help`` load no part of the
library, and a fixed design never loads the heavy libraries it does not use (OR-Tools only
when CP-SAT runs, scipy.stats and scipy.ndimage nowhere on these paths, no other circuit's
package, no file lock; issue 15, target 5). Checked in a fresh interpreter through
``sys.modules``, not by timing."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

HEAVY = ("ortools", "scipy.stats", "pandas", "fastapi", "sqlalchemy", "dask", "matplotlib")
#: Loaded only where used: the spline filter (the comparator table's first computation), the
#: other circuits' packages (``circuits.TOPOLOGIES`` imports each on first look-up) and the
#: stock writer's lock.
ON_USE = (
    "scipy.ndimage",
    "tristock.circuits.comparator_schmitt",
    "tristock.circuits.clamped_schmitt",
    "tristock.circuits.duty_schmitt",
    "filelock",
)
#: Not even these for ``import tristock.cli`` and ``--help``.
LIBRARIES = ("numpy", "scipy", "pydantic", "tristock.circuits", "tristock.search")

IMPORTED = "import json, sys; import tristock.cli; print(json.dumps(sorted(sys.modules)))"

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


def _heavy(modules: set[str], heavy: tuple[str, ...] = HEAVY) -> list[str]:
    return sorted(m for m in modules if any(m == h or m.startswith(h + ".") for h in heavy))


def test_importing_the_command_loads_no_library() -> None:
    proc = subprocess.run(
        [sys.executable, "-c", IMPORTED], capture_output=True, text=True, timeout=60, check=True
    )
    modules = set(json.loads(proc.stdout))
    assert "tristock.cli" in modules
    assert _heavy(modules, HEAVY + ON_USE + LIBRARIES) == []


def test_help_loads_no_heavy_library() -> None:
    code, modules, out = _loaded("--help")
    assert code == 0
    assert "design" in out  # the help text was printed
    assert _heavy(modules, HEAVY + ON_USE + LIBRARIES) == []  # no part of the library either


def test_fixed_design_loads_no_heavy_library() -> None:
    code, modules, out = _loaded("design", "--example", "--top", "2")
    assert code == 0
    assert "GA-" in out  # a design table with the demo's op amps was printed
    assert _heavy(modules, HEAVY + ON_USE) == []
    assert "tristock.circuits.opamp_schmitt" in modules  # the demo's circuit, and only it


def test_a_variant_design_loads_its_own_circuit_only() -> None:
    code, modules, _ = _loaded("design", "--example", "comparator", "--top", "1")
    assert code == 0
    assert "tristock.circuits.comparator_schmitt" in modules
    assert _heavy(modules, HEAVY + ON_USE[2:]) == []


def test_cpsat_engine_loads_ortools_on_use() -> None:
    code, modules, _ = _loaded("design", "--example", "--top", "2", "--engine", "cpsat")
    assert code == 0
    assert "ortools.sat.python.cp_model" in modules
