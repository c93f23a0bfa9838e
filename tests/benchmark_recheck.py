"""The re-check against the search, Monte Carlo, and the command's start (a script, not a
test): issue 15's targets 1 and 5, measured in one run.

    python tests/benchmark_recheck.py [--runs 7]

1. On the bundled demo (default engine, top 10): ``build_model`` + ``enumerate_top`` and the
   whole ``design()`` (search, full-model re-check and analysis of the answers; the worst
   cases remembered from earlier runs forgotten first), interleaved run by run; medians and
   their ratio; and ``design()`` once more with its answers' worst cases remembered (what a
   server meets when a board comes back under another target).
2. ``monte_carlo`` of the demo's rank 1 with 100,000 samples (seed 0), median wall and CPU
   time, and its two big parts measured alone: drawing the deviations (``deviations``:
   uniform numbers, the inverse normal CDF) and the model at every sample
   (``spread.metric_columns``).
3. Whole processes: ``tristock --help`` and ``tristock design --example`` (wall and CPU time
   from ``os.wait4``'s resource usage), median; with the modules' bytecode cached (as after
   ``pip install``: ``PYTHONPYCACHEPREFIX`` a fresh folder, filled by one run not counted), and
   in this shell's environment (where ``PYTHONDONTWRITEBYTECODE=1`` and no ``__pycache__``
   beside the sources, every process compiles the library's sources again).
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable

import numpy as np

from tristock.analysis.memo import forget as forget_remembered
from tristock.analysis.montecarlo import deviations, monte_carlo
from tristock.analysis.spread import metric_columns, spread_board
from tristock.circuits.board import Design, resolve
from tristock.designs import design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.enumeration import enumerate_top
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog

_LAUNCHER = (
    "import os, subprocess, sys, time\n"
    "t0 = time.perf_counter()\n"
    "p = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)\n"
    "_, status, usage = os.wait4(p.pid, 0)\n"
    "print(time.perf_counter() - t0, usage.ru_utime + usage.ru_stime)\n"
)


def process(argv: list[str], runs: int, env: dict[str, str] | None = None) -> tuple[float, float]:
    """Median wall and CPU seconds of a whole process (``env``: its environment)."""
    walls, cpus = [], []
    for _ in range(runs):
        out = subprocess.run(
            [sys.executable, "-c", _LAUNCHER, *argv],
            capture_output=True,
            text=True,
            check=True,
            env=env,
        ).stdout.split()
        walls.append(float(out[0]))
        cpus.append(float(out[1]))
    return statistics.median(walls), statistics.median(cpus)


def timed(call: Callable[[], object], runs: int) -> tuple[float, float]:
    """Median wall and CPU (this process) seconds of ``call``, after one warm-up call."""
    call()
    walls, cpus = [], []
    for _ in range(runs):
        w0, c0 = time.perf_counter(), time.process_time()
        call()
        walls.append(time.perf_counter() - w0)
        cpus.append(time.process_time() - c0)
    return statistics.median(walls), statistics.median(cpus)


def fresh_monte_carlo(design: Design, spec: Spec, samples: int) -> object:
    """``monte_carlo`` sampled afresh (its remembered samples forgotten, ``analysis.memo``)."""
    forget_remembered()
    return monte_carlo(design, spec, samples=samples)


def monte_carlo_parts(design: Design, spec: Spec, runs: int, samples: int = 100_000) -> None:
    """Print the Monte Carlo's median time and that of its two big parts."""
    board, variables = spread_board(design, spec)
    z = deviations(np.random.default_rng(0), variables, samples, "normal")
    for label, call in (
        ("monte_carlo, 100,000 samples", lambda: fresh_monte_carlo(design, spec, samples)),
        (
            "  alone: drawing deviations",
            lambda: deviations(np.random.default_rng(0), variables, samples, "normal"),
        ),
        ("  alone: the model", lambda: metric_columns(board, variables, z)),
    ):
        wall, cpu = timed(call, runs)
        print(f"  {label:<28} {wall * 1e3:8.1f} ms   (CPU {cpu * 1e3:6.1f} ms)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--runs", type=int, default=7)
    args = ap.parse_args()
    spec = load_spec(example_spec_path())
    catalog = load_catalog(demo_catalog_dir())
    result = design(spec, catalog)  # warm-up: the comparator-edge table, caches
    searches, designs, remembered = [], [], []
    for _ in range(args.runs):
        t0 = time.perf_counter()
        enumerate_top(build_model(spec, catalog), spec.ranking.top, 60.0)
        t1 = time.perf_counter()
        forget_remembered()
        t2 = time.perf_counter()
        design(spec, catalog)
        t3 = time.perf_counter()
        design(spec, catalog)  # the answers' worst cases remembered
        searches.append(t1 - t0)
        designs.append(t3 - t2)
        remembered.append(time.perf_counter() - t3)
    s, d = statistics.median(searches), statistics.median(designs)
    r = statistics.median(remembered)
    print(f"demo, {args.runs} runs interleaved (median)")
    print(f"  build_model + enumerate_top  {s * 1e3:8.1f} ms")
    print(f"  design()                     {d * 1e3:8.1f} ms   ({d / s:.2f}x the search)")
    print(f"    again, worst cases known   {r * 1e3:8.1f} ms   ({r / s:.2f}x the search)")
    rank1 = resolve(result.candidates[0].design_file.parts, catalog)
    monte_carlo_parts(rank1, spec, args.runs)
    tristock = [sys.executable, "-m", "tristock"]
    with tempfile.TemporaryDirectory() as prefix:
        cached = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
        cached["PYTHONPYCACHEPREFIX"] = prefix
        for label, argv in (
            ("tristock --help", [*tristock, "--help"]),
            ("tristock design --example", [*tristock, "design", "--example"]),
        ):
            process(argv, 1, cached)  # writes the bytecode
            for how, env in (("bytecode cached", cached), ("this environment", None)):
                wall, cpu = process(argv, args.runs, env)
                print(f"  {label:<26} {how:<18} wall {wall:6.2f} s   CPU {cpu:6.2f} s")
    print(f"load average at the end: {', '.join(f'{x:.1f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
