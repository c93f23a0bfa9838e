"""Check a built tristock wheel: its contents, then the wheel installed in a fresh venv.

    python tests/check_wheel.py dist/tristock-0.1.0-py3-none-any.whl [--venv DIR]

Contents: nothing outside ``tristock/`` and its ``.dist-info`` (no top-level ``api``), every
module of ``src/tristock`` and ``api/`` (as ``tristock/api``), ``tristock/py.typed``, the demo
catalog's tables, the bundled examples, the workbench's templates and static files, no caches,
locks, journals or temporary files, and core metadata of a version that carries
``License-Expression``. Then (unless ``--contents-only``) the wheel is installed into a new venv
(``--venv``, default a temporary folder; it must lie outside the repository) and run from a
folder outside the repository: ``python -m tristock --version``, ``python -m tristock design
--example``, ``tristock.api`` imports and nothing named ``api`` does, the workbench's page
renders and its script and Swagger UI are there. Prints what it checked; exit 1 with every
problem listed. CI runs it
(``.ci/run``); ``tests/test_check_wheel.py`` holds its rules to wheels that break them.
"""

from __future__ import annotations

import argparse
import email.parser
import os
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = ("demo", "trimmed", "tuned")
#: Files that must never ship: caches, a catalog's lock and write journal, temporary writes.
STRAY_SUFFIXES = (".pyc", ".tmp", ".tristock.lock", ".tristock-writes.jsonl")
#: Core metadata versions that define License-Expression (PEP 639 and later).
LICENSE_EXPRESSION_FROM = (2, 4)


def expected_files(repo: Path = REPO) -> set[str]:
    """Wheel paths the source tree promises: modules, py.typed, demo tables, examples, the
    workbench's templates and static files."""
    wanted = {"tristock/py.typed"}
    src = repo / "src" / "tristock"
    wanted |= {f"tristock/{p.relative_to(src).as_posix()}" for p in src.rglob("*.py")}
    api = repo / "api"
    wanted |= {f"tristock/api/{p.relative_to(api).as_posix()}" for p in api.rglob("*.py")}
    web = api / "web"  # the workbench's templates and static files are package data
    for folder in ("templates", "static"):
        wanted |= {
            f"tristock/api/{p.relative_to(api).as_posix()}"
            for p in (web / folder).rglob("*")
            if p.is_file()
        }
    demo = repo / "catalogs" / "demo"
    wanted |= {f"tristock/demo_catalog/{p.name}" for p in demo.glob("*.csv")}
    wanted |= {f"tristock/examples/{name}.toml" for name in EXAMPLES}
    return {name for name in wanted if "__pycache__" not in name}


def metadata_version(metadata: str) -> tuple[int, ...]:
    """The ``Metadata-Version`` of a METADATA text, as a tuple of ints."""
    headers = email.parser.Parser().parsestr(metadata, headersonly=True)
    return tuple(int(part) for part in headers["Metadata-Version"].split("."))


def wheel_problems(names: list[str], metadata: str, expected: set[str]) -> list[str]:
    """Every way the listing ``names`` and ``metadata`` break the rules above (empty: fine)."""
    problems: list[str] = []
    tops = {name.split("/", 1)[0] for name in names}
    for top in sorted(tops):
        if top != "tristock" and not (top.startswith("tristock-") and top.endswith(".dist-info")):
            problems.append(f"top-level entry {top!r}: only tristock/ and its .dist-info belong")
    problems += [f"missing {name}" for name in sorted(expected - set(names))]
    for name in names:
        if "__pycache__" in name.split("/") or name.endswith(STRAY_SUFFIXES):
            problems.append(f"stray file {name}")
    headers = email.parser.Parser().parsestr(metadata, headersonly=True)
    if headers["License-Expression"] and metadata_version(metadata) < LICENSE_EXPRESSION_FROM:
        problems.append(
            f"Metadata-Version {headers['Metadata-Version']} does not define License-Expression"
        )
    if not headers["License-Expression"]:
        problems.append("no License-Expression in METADATA")
    return problems


def read_wheel(wheel: Path) -> tuple[list[str], str]:
    """The wheel's file names and its METADATA text."""
    with zipfile.ZipFile(wheel) as archive:
        names = archive.namelist()
        meta = next(n for n in names if n.endswith(".dist-info/METADATA"))
        return names, archive.read(meta).decode("utf-8")


def _run(argv: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV")}
    return subprocess.run(argv, cwd=cwd, env=env, capture_output=True, text=True, timeout=900)


def installed_problems(wheel: Path, venv: Path, version: str) -> list[str]:
    """Install ``wheel`` into a new venv at ``venv`` and run it from outside the repository."""
    if venv.resolve().is_relative_to(REPO):
        return [f"{venv} lies inside the repository"]
    outside = Path(tempfile.mkdtemp(prefix="tristock-wheel-run-"))
    made = _run([sys.executable, "-m", "venv", str(venv)], outside)
    if made.returncode != 0:
        return [f"venv: {made.stderr.strip()}"]
    python = str(venv / ("Scripts" if os.name == "nt" else "bin") / "python")
    pip = _run([python, "-m", "pip", "install", "-q", str(wheel)], outside)
    if pip.returncode != 0:
        return [f"pip install: {pip.stderr.strip()[-2000:]}"]
    problems: list[str] = []
    shown = _run([python, "-m", "tristock", "--version"], outside)
    if shown.stdout.strip() != f"tristock {version}":
        problems.append(f"--version printed {shown.stdout.strip()!r} ({shown.stderr.strip()})")
    design = _run([python, "-m", "tristock", "design", "--example"], outside)
    if design.returncode != 0 or "Rank 1 parts:" not in design.stdout:
        problems.append(f"design --example: exit {design.returncode}: {design.stderr.strip()}")
    probe = (
        "import importlib.util, pathlib, sysconfig, tristock.api.app as app\n"
        "site = pathlib.Path(sysconfig.get_paths()['purelib'])\n"
        "assert pathlib.Path(app.__file__).is_relative_to(site), app.__file__\n"
        "assert importlib.util.find_spec('api') is None, 'a module named api imports'\n"
        "assert not (site / 'api').exists(), 'site-packages holds api'\n"
        "assert (site / 'tristock' / 'py.typed').is_file()\n"
        "import tristock.api.web.pages as pages\n"
        "assert pages.templates.get_template('index.html').render(sections=(), examples=())\n"
        "assert (pathlib.Path(pages.__file__).parent / 'static' / 'workbench.js').is_file()\n"
        "assert (pages.swagger_dir() / 'swagger-ui-bundle.js').is_file()\n"
    )
    imported = _run([python, "-c", probe], outside)
    if imported.returncode != 0:
        problems.append(f"imports: {imported.stderr.strip()}")
    return problems


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("wheel", type=Path)
    parser.add_argument("--venv", type=Path, help="where to create the venv (outside the repo)")
    parser.add_argument("--contents-only", action="store_true", help="skip the installed checks")
    args = parser.parse_args(argv)
    names, metadata = read_wheel(args.wheel)
    expected = expected_files()
    problems = wheel_problems(names, metadata, expected)
    print(f"{args.wheel.name}: {len(names)} files, {len(expected)} expected ones checked")
    if not args.contents_only and not problems:
        venv = args.venv or Path(tempfile.mkdtemp(prefix="tristock-wheel-venv-")) / "venv"
        version = email.parser.Parser().parsestr(metadata, headersonly=True)["Version"]
        problems += installed_problems(args.wheel.resolve(), venv, version)
        print(f"installed in {venv}: --version, design --example, imports checked")
    for problem in problems:
        print(f"check_wheel: {problem}", file=sys.stderr)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
