"""Shared by the CLI tests: run ``tristock`` in-process or as a process, and build inputs.

Import as ``from cli_helpers import ...`` (pytest puts this folder on sys.path).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import subprocess
import sys
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import Any

from tristock.cli import main
from tristock.designs import design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog

REPO = Path(__file__).resolve().parents[2]
SMALL_CATALOG = REPO / "tests" / "fixtures" / "small_catalog"
DEMO_CATALOG = demo_catalog_dir()
EXIT_CODES = {0, 1, 2, 3}

#: A spec the small fixture catalog meets (two designs found in about 0.1 s). Its largest
#: R3·C1 is 82 µs, so 20 kHz; there its op amps set about a quarter of the period.
SMALL_SPEC: dict[str, Any] = {
    "supply": {"positive_v": 12.0, "negative_v": -12.0},
    "frequency": {"target_hz": 20000.0, "tolerance_pct": 5.0},
    "triangle": {"amplitude_vpp": 4.0, "tolerance_pct": 10.0},
    "limits": {"max_timing_share": 0.4},
    "ranking": {"top": 2},
}


@dataclass(frozen=True)
class Run:
    code: int
    out: str
    err: str


def run(*argv: str | Path) -> Run:
    """``tristock ARGV`` in this process, stdout and stderr captured."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return Run(code, out.getvalue(), err.getvalue())


def run_process(*argv: str | Path, timeout: float = 120.0, **kw: Any) -> Run:
    """``tristock ARGV`` as a real process (``python -m tristock.cli``)."""
    done = subprocess.run(
        [sys.executable, "-m", "tristock.cli", *(str(a) for a in argv)],
        capture_output=True,
        text=True,
        timeout=timeout,
        env={**os.environ, **kw.pop("env", {})},
        **kw,
    )
    return Run(done.returncode, done.stdout, done.stderr)


def strict_json(text: str) -> Any:
    """Parse JSON as a strict parser does: NaN, Infinity and -Infinity are refused."""

    def refuse(token: str) -> None:
        raise ValueError(f"{token} is not JSON")

    return json.loads(text, parse_constant=refuse)


def assert_clean(r: Run, allowed: set[int] = EXIT_CODES) -> None:
    """No traceback, no crash log, a documented exit code; exit 2 is one line on stderr; a
    JSON answer is strict JSON."""
    assert r.code in allowed, (r.code, r.err[-2000:])
    assert "Traceback" not in r.err and "Traceback" not in r.out, r.err[-2000:]
    assert "internal error" not in r.err, r.err
    if r.code == 2:
        assert len(r.err.strip().splitlines()) == 1, r.err
    if r.code in (1, 2, 3):
        assert r.err.strip() or r.code == 3, "a failure says why on stderr"
    if r.out.startswith("{"):
        data = strict_json(r.out)
        assert isinstance(data, dict)


@cache
def demo_parts() -> dict[str, str]:
    """Rank 1 of the bundled demo spec on the demo catalog (computed once)."""
    spec = load_spec(example_spec_path("demo"))
    result = design(spec, load_catalog(DEMO_CATALOG))
    return {k: v.id for k, v in result.candidates[0].parts.items()}


def demo_spec_data() -> dict[str, Any]:
    return load_spec(example_spec_path("demo")).model_dump(mode="json")


def write_design(path: Path, parts: dict[str, str], **extra: Any) -> Path:
    """A DESIGN file (JSON) with the demo spec and these parts."""
    path.write_text(json.dumps({"spec": demo_spec_data(), "parts": parts, **extra}), "utf-8")
    return path


def latching_parts() -> dict[str, str]:
    """The demo design with R1 the catalogued resistor nearest 10 x R2: the thresholds lie
    ten times beyond the square levels, so the loop cannot oscillate."""
    catalog = load_catalog(DEMO_CATALOG)
    parts = dict(demo_parts())
    r2 = catalog.get(parts["R2"]).value_ohm  # type: ignore[union-attr]
    nearest = min(catalog.resistors, key=lambda r: abs(math.log(r.value_ohm / (10 * r2))))
    parts["R1"] = nearest.id
    return parts
