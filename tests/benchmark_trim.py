"""Trimmed designs in-process: the bundled example, re-optimisation and time limits (a script,
not a test).

    python tests/benchmark_trim.py [--runs 20]

1. ``design`` of the bundled trimmed example (``tristock design --example trimmed``) on the
   demo catalog, each run on a fresh catalog object (no caches), timed with
   ``time.perf_counter``; the search (``TrimSearch`` and the walk with its box coverage
   checks) is timed apart from the analysis of the answers reported, which comes on top of
   the time limit.
2. ``reoptimise`` of the example's rank 1 with one part unavailable, rotating U1, R1, R2, R3,
   C1, RV1.
3. Time limits: the search with limits from 1 ms to 0.3 s; how far past its limit the search
   ran (the analysis of the answers excluded), and whether it said ``proven_optimal``.
"""

from __future__ import annotations

import argparse
import statistics
import time
from pathlib import Path

from tristock.designs import design
from tristock.designs.reoptimise import reoptimise
from tristock.designs.trimmed.context import TRIM_DESIGNATORS, trim_context
from tristock.designs.trimmed.walk import TrimSearch, walk
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "catalogs" / "demo"
EXAMPLE = REPO / "src" / "tristock" / "examples" / "trimmed.toml"


def p90(values: list[float]) -> float:
    """90th percentile, linear between order statistics (statistics.quantiles, inclusive)."""
    return statistics.quantiles(values, n=10, method="inclusive")[8]


def line(name: str, seconds: list[float]) -> str:
    return f"| {name} | {1e3 * statistics.median(seconds):.0f} ms | {1e3 * p90(seconds):.0f} ms |"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=20)
    args = parser.parse_args()
    spec = load_spec(EXAMPLE)

    total, search = [], []
    for _ in range(args.runs):
        catalog = load_catalog(DEMO)
        t0 = time.perf_counter()
        ctx = trim_context(spec, catalog)
        walked = walk([TrimSearch(ctx, t0 + 60.0)], spec.ranking.top, t0 + 60.0)
        search.append(time.perf_counter() - t0)
        assert walked.proven and len(walked.accepted) == spec.ranking.top
        t0 = time.perf_counter()
        result = design(spec, catalog, time_limit_s=60.0)
        total.append(time.perf_counter() - t0)
        assert result.search.proven_optimal
    first = result.candidates[0]
    ids = ", ".join(p.id for p in first.parts.values())
    print(f"trimmed example ({args.runs} runs): rank 1 {ids}")
    print("| step | median | p90 |\n| --- | --- | --- |")
    print(line("search and box coverage checks (proven)", search))
    print(line("design() incl. the analysis of the 5 answers", total))

    current = {d: p.id for d, p in first.parts.items()}
    reopt = []
    for n in range(args.runs):
        gone = current[TRIM_DESIGNATORS[n % len(TRIM_DESIGNATORS)]]
        t0 = time.perf_counter()
        r = reoptimise(spec, load_catalog(DEMO), current, without=[gone], time_limit_s=60.0)
        reopt.append(time.perf_counter() - t0)
        assert r.search.proven_optimal and r.candidates
    print(line("reoptimise, one part unavailable (rotating)", reopt))

    print("\n| time limit | search ran | over the limit | proven |\n| --- | --- | --- | --- |")
    catalog = load_catalog(DEMO)
    for limit in (0.001, 0.01, 0.03, 0.1, 0.3, 1.0, 3.0):
        t0 = time.perf_counter()
        ctx = trim_context(spec, catalog)
        walked = walk([TrimSearch(ctx, t0 + limit)], spec.ranking.top, t0 + limit)
        ran = time.perf_counter() - t0
        print(f"| {1e3 * limit:g} ms | {1e3 * ran:.0f} ms | {1e3 * max(ran - limit, 0):.0f} ms "
              f"| {'yes' if walked.proven else 'no'} |")  # fmt: skip


if __name__ == "__main__":
    main()
