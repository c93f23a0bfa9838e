"""The comparator edge's spline look-ups by batch size (a script, not a test): where the
gathered terms give way to one pass per term (``circuits.gridspline.FEW_POINTS``).

    python tests/benchmark_spline.py [--runs 200]

For each number of points, ``spline_value`` on the edge's mean-time table (the 3-d table
``circuits.transition`` reads; uniform random points inside it, seed 1) with every batch
forced through the gathered path and through the passes, median microseconds over ``--runs``
calls each after one warm-up (``time.perf_counter``), and whether both paths gave the same
bits (they must: the switch between them changes no value).
"""

from __future__ import annotations

import argparse
import functools
import statistics
import time
from collections.abc import Callable

import numpy as np

from tristock.circuits import gridspline
from tristock.circuits.edgetable import PAD, coefficients
from tristock.circuits.gridspline import grid_axis

SIZES = (1, 8, 64, 256, 512, 1024, 2048, 4096, 16384, 100_000)


def median_us(call: Callable[[], object], runs: int) -> float:
    call()
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        call()
        times.append(time.perf_counter() - t0)
    return statistics.median(times) * 1e6


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=200)
    args = parser.parse_args()
    table = np.ascontiguousarray(coefficients().levels[0])
    rng = np.random.default_rng(1)
    chosen = gridspline.FEW_POINTS
    print(f"FEW_POINTS = {chosen}; table {table.shape}")
    print("| points | gathered | passes | same bits |\n| --- | --- | --- | --- |")
    try:
        for n in SIZES:
            axes = tuple(
                grid_axis(rng.uniform(PAD, lines - 1 - PAD, n), PAD, lines - 1.0 - PAD)
                for lines in table.shape
            )
            runs = max(20, min(args.runs, args.runs * 2048 // n))
            found = {}
            for path, few in (("gathered", n), ("passes", 0)):
                gridspline.FEW_POINTS = few
                found[path] = (
                    median_us(functools.partial(gridspline.spline_value, table, axes), runs),
                    gridspline.spline_value(table, axes),
                )
            same = np.array_equal(found["gathered"][1], found["passes"][1])
            print(
                f"| {n:,} | {found['gathered'][0]:,.0f} us | {found['passes'][0]:,.0f} us "
                f"| {'yes' if same else 'NO'} |"
            )
    finally:
        gridspline.FEW_POINTS = chosen


if __name__ == "__main__":
    main()
