"""Latency of the worst-case box search (a script, not a test).

    python tests/benchmark_worstcase.py [--runs 40]

The design is the demo spec's rank 1 (found once by ``design``), analysed against the demo
spec and against the asymmetric-rail spec of the interior-maximum test (+12 V / -10 V, ±10 %
each, 0..70 °C). Times, by ``time.perf_counter`` over ``--runs`` calls each (median, p90):
``worst_case`` (six extremes) and the coverage bound (``box_extremes``; frequency only, as
``trim.coverage`` asks). Prints the model evaluations per call and the frequency bounds.

Before/after: the script also runs on a tree older than ``tristock.analysis.worstcase`` (where
``analysis.worst_case`` refined only the offset and bias variables and
``analysis.corner_extremes`` evaluated the corners), e.g.
``PYTHONPATH=<old tree>/src python tests/benchmark_worstcase.py``, so both are timed alike.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from tristock.circuits.board import DESIGNATORS, Design
from tristock.designs import design
from tristock.export.designfile import design_for
from tristock.spec.loading import load_spec, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog

try:
    from tristock.analysis.memo import forget as forget_remembered
    from tristock.analysis.worstcase import box_extremes, worst_case

    def coverage_bound(d: Design, spec: Spec) -> dict[str, tuple[float, float]]:
        return box_extremes(d, spec, ["frequency_hz"])

    CODE = "box search (tristock.analysis.worstcase)"
except ImportError:  # an older tree: corners and an offset/bias refinement
    from tristock.analysis.bundle import corner_extremes as coverage_bound  # type: ignore
    from tristock.analysis.worstcase import worst_case  # type: ignore

    def forget_remembered() -> None:  # nothing remembered there
        pass

    CODE = "corners (analysis.worst_case, analysis.corner_extremes)"

REPO = Path(__file__).resolve().parent.parent


def fresh_worst_case(board: Design, spec: Spec) -> Any:
    """``worst_case`` searched, not remembered from the run before."""
    forget_remembered()
    return worst_case(board, spec)


def p90(values: list[float]) -> float:
    """90th percentile, linear between order statistics (statistics.quantiles, inclusive)."""
    return statistics.quantiles(values, n=10, method="inclusive")[8]


def timed(call: Callable[[], Any], runs: int) -> tuple[list[float], Any]:
    """Wall times of ``runs`` calls after one warm-up call, and the last result."""
    result = call()
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        result = call()
        times.append(time.perf_counter() - t0)
    return times, result


def asymmetric(spec: Spec) -> Spec:
    data = spec.model_dump(exclude_none=True)
    data["supply"] = {"positive_v": 12.0, "negative_v": -10.0, "tolerance_pct": 10.0}
    data["environment"] = {"temp_min_c": 0.0, "temp_max_c": 70.0}
    return parse_spec(data)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=40)
    args = parser.parse_args(argv)
    if args.runs < 2:
        parser.error("--runs must be at least 2")
    catalog = load_catalog(REPO / "catalogs" / "demo")
    demo = load_spec(REPO / "src" / "tristock" / "examples" / "demo.toml")
    best = design(demo, catalog, engine="enumerate").candidates[0]
    parts = {d: best.parts[d].id for d in DESIGNATORS}
    board = design_for(demo, parts, catalog)
    print(f"code: {CODE}")
    print("design: demo rank 1, " + ", ".join(f"{d} {parts[d]}" for d in DESIGNATORS))
    ms = 1000.0
    for label, spec in (("demo spec", demo), ("+12/-10 V ±10 %, 0..70 °C", asymmetric(demo))):
        wc_times, wc = timed(lambda s=spec: fresh_worst_case(board, s), args.runs)
        cov_times, cov = timed(lambda s=spec: coverage_bound(board, s), args.runs)
        lo, hi = wc.frequency_hz
        print(f"{label}: {len(wc.variables)} spread variables, method {wc.method}")
        print(
            f"  worst_case      median {statistics.median(wc_times) * ms:6.1f} ms   "
            f"p90 {p90(wc_times) * ms:6.1f} ms   {wc.evaluations} evaluations   "
            f"f {lo:.4f} .. {hi:.4f} Hz"
        )
        c_lo, c_hi = cov["frequency_hz"]
        print(
            f"  coverage bound  median {statistics.median(cov_times) * ms:6.1f} ms   "
            f"p90 {p90(cov_times) * ms:6.1f} ms   f {c_lo:.4f} .. {c_hi:.4f} Hz"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
