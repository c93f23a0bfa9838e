"""What distinct designs cost: ``design()`` on the bundled examples with every variant ranked
(the library's default) and with distinct designs (the CLI's and the API's default), and the
rows the engine scored for each.

    python tests/benchmark_distinct.py [--runs 10] [--tuned]

Prints the median and p90 of each, in ms (the two modes alternate run by run), and whether
every run was proven optimal.
"""

from __future__ import annotations

import argparse
import statistics
import time

from tristock.designs import design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=10)
    parser.add_argument("--tuned", action="store_true", help="the tuned example too (slow)")
    args = parser.parse_args()
    catalog = load_catalog(demo_catalog_dir())
    examples = ["demo", "trimmed", *(["tuned"] if args.tuned else [])]
    print(f"{'example':<9}{'mode':<10}{'median ms':>10}{'p90 ms':>10}{'rows':>8}  proven")
    for name in examples:
        spec = load_spec(example_spec_path(name))
        times: dict[bool, list[float]] = {False: [], True: []}
        rows: dict[bool, int] = {}
        proven = {False: True, True: True}
        for _ in range(args.runs):
            for distinct in (False, True):  # alternate, so a change of load hits both
                t0 = time.perf_counter()
                result = design(spec, catalog, distinct=distinct, time_limit_s=120.0)
                times[distinct].append(time.perf_counter() - t0)
                rows[distinct] = result.search.evaluated
                proven[distinct] &= result.search.proven_optimal
        for distinct in (False, True):
            ts = sorted(times[distinct])
            p90 = ts[min(len(ts) - 1, round(0.9 * (len(ts) - 1)))]
            mode = "distinct" if distinct else "all"
            print(
                f"{name:<9}{mode:<10}{1e3 * statistics.median(ts):>10.0f}{1e3 * p90:>10.0f}"
                f"{rows[distinct]:>8}  {proven[distinct]}"
            )


if __name__ == "__main__":
    main()
