"""How tristock installs: ``python -m tristock``, a light ``--version``, ``tristock.api`` from
the checkout's ``api/`` folder in an editable install (and nothing named ``api``), the
editable finder itself, and the layering rule (only ``serve`` imports the HTTP layer).

The wheel's own contents are checked by ``tests/check_wheel.py`` in CI (``.ci/run``)."""

from __future__ import annotations

import ast
import importlib.metadata
import importlib.util
import json
import os
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import pytest

import tristock

REPO = Path(__file__).resolve().parents[1]
#: Imported by the searches, the models or the service; never by --version or --help.
HEAVY = ("numpy", "scipy", "ortools", "pydantic", "fastapi", "matplotlib", "uvicorn")

RUN_COMMAND = """
import runpy, sys
sys.argv = ["tristock", *sys.argv[1:]]
try:
    runpy.run_module("tristock", run_name="__main__", alter_sys=True)
except SystemExit as done:
    code = done.code
heavy = [name for name in {heavy!r} if name in sys.modules]
print(f"exit={{code}} heavy={{','.join(heavy)}}", file=sys.stderr)
"""


def run_outside(tmp_path: Path, *argv: str) -> subprocess.CompletedProcess[str]:
    """Python in a folder outside the checkout (so the current folder adds nothing)."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    return subprocess.run(
        [sys.executable, *argv], cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120
    )


@pytest.mark.parametrize("option", ["--version", "--help"])
def test_python_m_tristock_answers_without_heavy_imports(tmp_path: Path, option: str) -> None:
    proc = run_outside(tmp_path, "-c", RUN_COMMAND.format(heavy=HEAVY), option)
    assert proc.returncode == 0, proc.stderr
    assert "exit=0 heavy=\n" in proc.stderr, proc.stderr
    if option == "--version":
        assert proc.stdout == f"tristock {tristock.__version__}\n"
    else:
        assert proc.stdout.startswith("usage: tristock")


def test_version_is_the_installed_distributions() -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "tristock", "--version"], capture_output=True, text=True, timeout=60
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.split() == ["tristock", importlib.metadata.version("tristock")]


def _editable() -> bool:
    text = importlib.metadata.distribution("tristock").read_text("direct_url.json")
    return bool(text and json.loads(text).get("dir_info", {}).get("editable"))


def test_editable_install_imports_tristock_api_from_the_checkout(tmp_path: Path) -> None:
    if not _editable():
        if os.environ.get("CI"):
            pytest.fail("CI installs tristock editable (.ci/run); this install is not")
        pytest.skip("tristock is not installed editable here")
    probe = (
        "import importlib.util, tristock.api.app as app, tristock.api.routers.design as d\n"
        "print(app.__file__); print(d.__file__)\n"
        "print(importlib.util.find_spec('api'))\n"
    )
    proc = run_outside(tmp_path, "-c", probe)
    assert proc.returncode == 0, proc.stderr
    app_file, design_file, api_spec = proc.stdout.splitlines()
    assert Path(app_file) == REPO / "api" / "app.py"
    assert Path(design_file) == REPO / "api" / "routers" / "design.py"
    assert api_spec == "None"  # nothing named ``api`` imports


def _finder_module() -> ModuleType:
    path = REPO / ".packaging" / "tristock_api_finder.py"
    spec = importlib.util.spec_from_file_location("finder_under_test", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_the_editable_finder_answers_for_tristock_api_alone(tmp_path: Path) -> None:
    finder = _finder_module().ApiFolderFinder(str(tmp_path))
    assert finder.find_spec("tristock.api") is None  # no __init__.py: not a package
    (tmp_path / "__init__.py").write_text("", encoding="utf-8")
    spec = finder.find_spec("tristock.api")
    assert spec is not None
    assert spec.origin == str(tmp_path / "__init__.py")
    assert spec.submodule_search_locations == [str(tmp_path)]
    assert finder.find_spec("api") is None
    assert finder.find_spec("tristock.api.app") is None  # sub-modules follow __path__
    assert finder.find_spec("tristock") is None


def _imports(path: Path) -> set[str]:
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found |= {alias.name for alias in node.names}
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            found.add(node.module)
    return found


def test_only_serve_imports_the_http_layer() -> None:
    src = REPO / "src" / "tristock"
    importers = {
        path.relative_to(src).as_posix()
        for path in src.rglob("*.py")
        if any(
            name == "api" or name.startswith(("api.", "tristock.api")) for name in _imports(path)
        )
    }
    assert importers == {"serve.py"}
