"""Ctrl-C during a long search: exit 130, "interrupted" on stderr, nothing on stdout.

Before, OR-Tools' CP-SAT caught SIGINT itself, stopped the search early and the command printed
an unproven rank 1 with exit 0. A generated catalog (577 E192 resistors, 97 E24 capacitors)
and the yield ranking make the demo search run for tens of seconds; the signal comes once the
process has spent 2.5 s of CPU time (imports and the catalog take about 1 s), so it lands in
the search.
"""

from __future__ import annotations

import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from cli_helpers import DEMO_CATALOG, run

from tristock.cli import exits

TIME_LIMIT_S = 60


def cpu_seconds(pid: int) -> float | None:
    """User + system CPU time of ``pid`` from /proc (Linux); None elsewhere."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return None
    import os

    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def big_catalog(folder: Path) -> Path:
    folder.mkdir()
    for name in ("opamps.csv", "pots.csv"):
        shutil.copy(DEMO_CATALOG / name, folder / name)
    common = ["--tolerance", "1", "--stock", "100000"]
    r = run(
        "catalog", "generate", "--kind", "resistor", "--series", "E192", "--from", "1k",
        "--to", "1M", "--tempco", "50", "--cost", "0.01", *common, "-o", folder / "resistors.csv",
    )  # fmt: skip
    assert r.code == 0, r.err
    r = run(
        "catalog", "generate", "--kind", "capacitor", "--series", "E24", "--from", "100p",
        "--to", "1u", "--dielectric", "C0G", "--tempco", "30", "--cost", "0.05", *common,
        "-o", folder / "capacitors.csv",
    )  # fmt: skip
    assert r.code == 0, r.err
    return folder


@pytest.mark.skipif(sys.platform == "win32", reason="SIGINT to a child needs POSIX signals")
def test_sigint_during_a_long_search_exits_130_without_a_result(tmp_path: Path) -> None:
    catalog = big_catalog(tmp_path / "big")
    argv = ["design", "--example", "--catalog", str(catalog), "--by", "yield", "--top", "100"]
    process = subprocess.Popen(
        [sys.executable, "-m", "tristock.cli", *argv, "--time-limit", str(TIME_LIMIT_S)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    start = time.monotonic()
    while time.monotonic() - start < 30:
        used = cpu_seconds(process.pid)
        if used is None:
            time.sleep(4.0)
            break
        if used >= 2.5:
            break
        time.sleep(0.1)
    assert process.poll() is None, "the search ended before it could be interrupted"
    sent = time.monotonic()
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=TIME_LIMIT_S)
    waited = time.monotonic() - sent
    assert process.returncode == exits.INTERRUPTED, err
    assert out == ""
    assert err.strip() == "tristock: interrupted"
    assert waited < 10.0, f"took {waited:.1f} s to stop"
