"""Run oscillator netlists in ngspice (batch mode) and read the .meas results.

The netlists are the topology's (``tristock.circuits.opamp_schmitt.netlist``, whose docstring
describes them: the comparator kinds "ideal", "slew" and "macro", the integrator, and the
simulator's pitfalls they handle). Here: ngspice always runs under a subprocess timeout, and
``.meas`` values carry 6 significant digits.

Import from tests as ``from ngspice_harness import ...`` (pytest puts tests/ on sys.path for
test modules in a directory without __init__.py).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

from tristock.circuits.opamp_schmitt.netlist import (  # the netlists live beside the topology
    MEASURES,
    SimCase,
    netlist,
)


class NgspiceError(RuntimeError):
    """ngspice failed, timed out, or did not report a measurement."""


def ngspice_path() -> str | None:
    """The ngspice binary on PATH, or None."""
    return shutil.which("ngspice")


def ngspice_available() -> bool:
    return ngspice_path() is not None


def require_ngspice() -> str:
    """The ngspice binary; skip the test when it is absent and CI is unset, fail under CI."""
    path = ngspice_path()
    if path is None:
        if os.environ.get("CI"):
            pytest.fail("ngspice is not installed, and CI is set: ngspice tests must run in CI")
        pytest.skip("ngspice is not installed")
    return path


_MEAS_LINE = re.compile(r"^\s*([A-Za-z_]\w*)\s*=\s*([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)")


def parse_measurements(log: str) -> dict[str, float]:
    """``name = value`` lines of an ngspice batch log (the .meas results), lower-case names."""
    out: dict[str, float] = {}
    for line in log.splitlines():
        m = _MEAS_LINE.match(line)
        if m:
            out[m.group(1).lower()] = float(m.group(2))
    return out


def run_ngspice(text: str, *, timeout_s: float = 60.0) -> dict[str, float]:
    """Run ``text`` with ``ngspice -b`` in a temporary directory; its measurements by name."""
    exe = ngspice_path()
    if exe is None:
        raise NgspiceError("ngspice is not on PATH")
    with tempfile.TemporaryDirectory(prefix="tristock-ngspice-") as tmp:
        cir = Path(tmp) / "osc.cir"
        cir.write_text(text, encoding="utf-8")
        try:
            proc = subprocess.run(
                [exe, "-b", str(cir)],
                cwd=tmp,
                capture_output=True,
                text=True,
                timeout=timeout_s,
                check=False,
            )
        except subprocess.TimeoutExpired as exc:
            raise NgspiceError(f"ngspice did not finish within {timeout_s} s") from exc
    if proc.returncode != 0:
        raise NgspiceError(f"ngspice exited {proc.returncode}:\n{proc.stdout[-2000:]}")
    return parse_measurements(proc.stdout)


def simulate(case: SimCase, *, timeout_s: float = 60.0) -> dict[str, float]:
    """Run ``case``; MEASURES plus vtpp and vtmid (relative to the reference)."""
    meas = run_ngspice(netlist(case), timeout_s=timeout_s)
    missing = [name for name in MEASURES if name not in meas]
    if missing:
        raise NgspiceError(f"ngspice reported no {', '.join(missing)} (got {sorted(meas)})")
    out = {name: meas[name] for name in MEASURES}
    out["vtmax"] -= case.v_ref
    out["vtmin"] -= case.v_ref
    out["vtpp"] = out["vtmax"] - out["vtmin"]
    out["vtmid"] = (out["vtmax"] + out["vtmin"]) / 2.0
    return out


def simulate_many(
    cases: Mapping[str, SimCase], *, workers: int | None = None, timeout_s: float = 60.0
) -> dict[str, dict[str, float] | NgspiceError]:
    """Run ``cases`` concurrently (one ngspice process per case, ``workers`` at a time).

    A failed case maps to its NgspiceError so that the other cases still report.
    """
    n = workers or max(2, os.cpu_count() or 2)

    def one(case: SimCase) -> dict[str, float] | NgspiceError:
        try:
            return simulate(case, timeout_s=timeout_s)
        except NgspiceError as exc:
            return exc

    with ThreadPoolExecutor(max_workers=n) as pool:
        futures = {name: pool.submit(one, case) for name, case in cases.items()}
        return {name: fut.result() for name, fut in futures.items()}
