"""Where the time of the speed targets still unmet goes (a script, not a test).

    python tests/benchmark_model_share.py [--runs 5]

Each workload is timed whole (median of ``--runs``, every run on a fresh catalog object with
the remembered analyses forgotten) and, inside it, two kernels of the model:

- the comparator edge's table look-ups (``circuits.transition._edge_times``: the quadratic
  B-spline of ``circuits.edgetable``, 27 gathered coefficients a point), with the number of
  calls and the mean points a call;
- the inverse normal CDF (``special.normal_quantile``) that draws the Monte Carlo's
  deviations.

The workloads: the demo's search (``build_model`` + ``enumerate_top``, what every distinct
HTTP request runs first), the demo's whole ``design()``, the trimmed example's search (as
``benchmark_trim.py``), the tuned example's ``design_tuned`` and a Monte Carlo of 100,000
samples of the demo's rank 1 (as ``benchmark_recheck.py``).
"""

from __future__ import annotations

import argparse
import statistics
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from types import ModuleType
from typing import Any

import numpy as np

from tristock.analysis import montecarlo
from tristock.analysis.memo import forget as forget_remembered
from tristock.circuits import transition
from tristock.circuits.board import resolve
from tristock.designs import design
from tristock.designs.trimmed.context import trim_context
from tristock.designs.trimmed.walk import TrimSearch, walk
from tristock.designs.tuned import design_tuned
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.enumeration import enumerate_top
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.stock.catalog import Catalog, load_catalog

LIMIT_S = 60.0


@dataclass
class Kernel:
    """Time, calls and points spent in one module function while it is patched."""

    module: ModuleType
    name: str
    seconds: float = 0.0
    calls: int = 0
    points: int = 0
    runs: list[tuple[float, int, int]] = field(default_factory=list)

    @contextmanager
    def counted(self) -> Iterator[None]:
        original = getattr(self.module, self.name)

        def timed(*args: Any, **kwargs: Any) -> Any:
            t0 = time.perf_counter()
            try:
                return original(*args, **kwargs)
            finally:
                self.seconds += time.perf_counter() - t0
                self.calls += 1
                arrays = [np.asarray(a) for a in args if a is not None]
                self.points += np.broadcast(*arrays).size

        setattr(self.module, self.name, timed)
        try:
            yield
        finally:
            setattr(self.module, self.name, original)

    def close_run(self) -> None:
        self.runs.append((self.seconds, self.calls, self.points))
        self.seconds, self.calls, self.points = 0.0, 0, 0


def measure(label: str, work: Callable[[Catalog], object], runs: int) -> None:
    """Print the workload's median time and each kernel's median share of it (the catalog
    is read before the clock starts)."""
    kernels = [
        Kernel(transition, "_edge_times"),
        Kernel(montecarlo, "normal_quantile"),
    ]
    totals = []
    work(load_catalog(demo_catalog_dir()))  # warm-up: the edge table, imports
    for _ in range(runs):
        catalog = load_catalog(demo_catalog_dir())
        forget_remembered()
        with kernels[0].counted(), kernels[1].counted():
            t0 = time.perf_counter()
            work(catalog)
            totals.append(time.perf_counter() - t0)
        for k in kernels:
            k.close_run()
    total = statistics.median(totals)
    print(f"{label}: {total * 1e3:.1f} ms (median of {runs})")
    for k in kernels:
        seconds = statistics.median(s for s, _, _ in k.runs)
        calls = statistics.median(c for _, c, _ in k.runs)
        points = statistics.median(p for _, _, p in k.runs)
        if calls:
            print(
                f"  {k.name:<16} {seconds * 1e3:8.1f} ms  {seconds / total:5.1%}  "
                f"{calls:6.0f} calls  {points / calls:9.0f} points a call"
            )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--runs", type=int, default=5)
    args = parser.parse_args()
    demo_dir = demo_catalog_dir()
    demo = load_spec(example_spec_path())
    trimmed = load_spec(example_spec_path("trimmed"))
    tuned = load_spec(example_spec_path("tuned"))
    rank1 = resolve(design(demo, load_catalog(demo_dir)).candidates[0].design_file.parts,
                    load_catalog(demo_dir))  # fmt: skip

    def trimmed_search(catalog: Catalog) -> object:
        deadline = time.perf_counter() + LIMIT_S
        return walk(
            [TrimSearch(trim_context(trimmed, catalog), deadline)], trimmed.ranking.top, deadline
        )

    measure("demo: build_model + enumerate_top",
            lambda catalog: enumerate_top(build_model(demo, catalog), 10, LIMIT_S),
            args.runs)  # fmt: skip
    measure("demo: design()", lambda catalog: design(demo, catalog), args.runs)
    measure("trimmed: search", trimmed_search, args.runs)
    measure("tuned: design_tuned",
            lambda catalog: design_tuned(tuned, catalog, time_limit_s=LIMIT_S),
            args.runs)  # fmt: skip
    measure("Monte Carlo, 100,000 samples",
            lambda _: montecarlo.monte_carlo(rank1, demo, samples=100_000), args.runs)  # fmt: skip


if __name__ == "__main__":
    main()
