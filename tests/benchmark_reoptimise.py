"""Latency of ``reoptimise`` on the bundled demo catalog, in-process (a script, not a test).

    python tests/benchmark_reoptimise.py [--runs 20] [--samples 4000]

The current design is the demo spec's best answer (found once by ``design``). Each run marks
one of its parts unavailable, rotating U1, R1, R2, R3, C1, and times the whole call with
``time.perf_counter``. The time inside the full-model re-check (``analyse``: nominal, worst
case, Monte Carlo, sensitivities) is measured by wrapping the ``analyse`` that reoptimise
calls; the rest is the search (model build, per-subset enumeration, merging). A second pass
with a small Monte Carlo shows how much of the analysis is the Monte Carlo itself.

Target: median under 200 ms.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import tristock.designs.reoptimise as reopt_module
from tristock.circuits.board import DESIGNATORS
from tristock.designs import design
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog

REPO = Path(__file__).resolve().parent.parent
TARGET_MEDIAN_S = 0.200


class AnalysisTimer:
    """Wraps a function, adding up the wall time and the number of its calls."""

    def __init__(self, inner: Callable[..., Any]) -> None:
        self.inner = inner
        self.seconds = 0.0
        self.calls = 0

    def __call__(self, *args: Any, **kwargs: Any) -> Any:
        t0 = time.perf_counter()
        try:
            return self.inner(*args, **kwargs)
        finally:
            self.seconds += time.perf_counter() - t0
            self.calls += 1


def p90(values: list[float]) -> float:
    """90th percentile, linear between order statistics (statistics.quantiles, inclusive)."""
    return statistics.quantiles(values, n=10, method="inclusive")[8]


def run(runs: int, samples: int, current: dict[str, str]) -> dict[str, list[float]]:
    """Time ``runs`` calls; returns per-run totals, analysis seconds, analysis calls."""
    catalog = load_catalog(REPO / "catalogs" / "demo")
    spec = load_spec(REPO / "src" / "tristock" / "examples" / "demo.toml")
    timer = AnalysisTimer(reopt_module.analyse)
    reopt_module.analyse = timer
    out: dict[str, list[float]] = {"total": [], "analysis": [], "calls": [], "changes": []}
    try:
        reopt_module.reoptimise(spec, catalog, current, without=[current["R3"]], samples=samples)
        for n in range(runs):
            gone = current[DESIGNATORS[n % len(DESIGNATORS)]]
            timer.seconds, timer.calls = 0.0, 0
            t0 = time.perf_counter()
            result = reopt_module.reoptimise(
                spec, catalog, current, without=[gone], samples=samples
            )
            out["total"].append(time.perf_counter() - t0)
            out["analysis"].append(timer.seconds)
            out["calls"].append(float(timer.calls))
            best = result.candidates[0] if result.candidates else None
            out["changes"].append(float(len(best.changed)) if best else float("nan"))
    finally:
        reopt_module.analyse = timer.inner
    return out


def _line(name: str, values: list[float], extra: str = "") -> str:
    ms = 1000.0
    med, hi = statistics.median(values) * ms, p90(values) * ms
    return f"  {name:<9} median {med:7.1f} ms   p90 {hi:7.1f} ms{extra}"


def report(label: str, data: dict[str, list[float]]) -> None:
    total, analysis, calls = data["total"], data["analysis"], data["calls"]
    search = [t - a for t, a in zip(total, analysis, strict=True)]
    each = sum(analysis) / max(sum(calls), 1) * 1000
    print(f"{label}: {len(total)} runs")
    print(_line("total", total))
    print(
        _line(
            "analysis", analysis, f"   ({statistics.median(calls):.0f} a run, {each:.1f} ms each)"
        )
    )
    print(_line("search", search))
    k = len(DESIGNATORS)
    medians = [
        f"{d} {statistics.median(total[i::k]) * 1000:.0f}"
        for i, d in enumerate(DESIGNATORS)
        if total[i::k]
    ]
    print("  median ms by designator removed: " + ", ".join(medians))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=20)
    parser.add_argument("--samples", type=int, default=4000, help="Monte Carlo samples")
    args = parser.parse_args(argv)
    if args.runs < 2:
        parser.error("--runs must be at least 2")

    catalog = load_catalog(REPO / "catalogs" / "demo")
    spec = load_spec(REPO / "src" / "tristock" / "examples" / "demo.toml")
    best = design(spec, catalog, engine="enumerate").candidates[0]
    current = {d: best.parts[d].id for d in DESIGNATORS}
    print("current design: " + ", ".join(f"{d} {current[d]}" for d in DESIGNATORS))

    full = run(args.runs, args.samples, current)
    report(f"reoptimise, samples={args.samples}", full)
    small = run(args.runs, 64, current)
    report("reoptimise, samples=64 (Monte Carlo share)", small)

    median = statistics.median(full["total"])
    verdict = "meets" if median < TARGET_MEDIAN_S else "MISSES"
    print(f"target: median < {TARGET_MEDIAN_S * 1000:.0f} ms -> {verdict} ({median * 1000:.1f} ms)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
