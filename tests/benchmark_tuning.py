"""Timing figures of the tuned search (a script, not a test): prints medians and p90s.

    python tests/benchmark_tuning.py [--runs 10]

1. ``tristock design --example tuned`` in-process (``cli.main``, output discarded): the search
   plus the analysis of the answers and the report;
2. the search alone (``tuning.design_tuned`` without the reported answers' analysis is not
   separable, so this is ``design_tuned`` with the example's top of 5);
3. re-optimisation of the example's rank 1 with each of its parts withdrawn in turn.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import statistics
import time
from pathlib import Path

from tristock import cli
from tristock.designs.reoptimise import reoptimise
from tristock.designs.tuned import design_tuned
from tristock.spec.loading import parse_spec, read_mapping
from tristock.stock.catalog import load_catalog

REPO = Path(__file__).resolve().parent.parent


def _stats(name: str, times: list[float], extra: str = "") -> None:
    times = sorted(times)
    p90 = times[min(len(times) - 1, int(0.9 * len(times)))]
    median = statistics.median(times) * 1e3
    print(f"{name:<46} median {median:8.0f} ms   p90 {p90 * 1e3:8.0f} ms {extra}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--runs", type=int, default=10)
    args = parser.parse_args()
    catalog = load_catalog(REPO / "catalogs" / "demo")
    spec = parse_spec(read_mapping(REPO / "src" / "tristock" / "examples" / "tuned.toml"))

    cli_times = []
    for _ in range(args.runs):
        t0 = time.perf_counter()
        with contextlib.redirect_stdout(io.StringIO()):
            assert cli.main(["design", "--example", "tuned"]) == 0
        cli_times.append(time.perf_counter() - t0)
    _stats("tristock design --example tuned (in-process)", cli_times)

    search_times, proven = [], []
    result = None
    for _ in range(args.runs):
        t0 = time.perf_counter()
        result = design_tuned(spec, catalog, time_limit_s=60.0)
        search_times.append(time.perf_counter() - t0)
        proven.append(result.search.proven_optimal)
    assert result is not None
    _stats(
        "design_tuned (search + answers' analysis)",
        search_times,
        f"proven {sum(proven)}/{len(proven)}, {result.search.evaluated:,} ranges evaluated",
    )

    best = result.candidates[0]
    current = {k: v.id for k, v in best.parts.items()}
    for name, pid in current.items():
        t0 = time.perf_counter()
        out = reoptimise(spec, catalog, current, without=[pid], time_limit_s=30.0)
        took = time.perf_counter() - t0
        first = out.candidates[0] if out.candidates else None
        what = f"{len(first.changed)} change(s)" if first else "no answer"
        print(
            f"reoptimise without {name} ({pid}): {took * 1e3:8.0f} ms, {what}, "
            f"proven {out.search.proven_optimal}"
        )


if __name__ == "__main__":
    main()
