"""Time limits of every design kind (a script, not a test): ``design()`` of each bundled example
under several limits, as the CLI and the API run it (distinct designs), on the demo catalog.

    python tests/benchmark_time_limits.py [--examples demo,clamped,...] [--limits 0.05,0.2,1]

For each run it prints the wall time, the re-check (the analysis of the answers kept, which
runs after the search's deadline: time spent in the answers' ``analyse`` calls), the overrun
beyond both (wall - re-check - limit), whether the answer says proven, how many answers
came back, and whether the spec was called infeasible (a search cut by its limit must never
say so). The first design of the process and each kind's first run are made beforehand and
not counted (the comparator-edge table, the trimmed and tuned searches' imports); the
analysis memory is emptied before every run.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import time
from collections.abc import Callable
from typing import Any

from tristock.analysis.memo import forget
from tristock.designs import design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog

#: Where each kind analyses the answers it keeps (module, name): timed as the re-check.
ANALYSES = (
    ("tristock.designs.fixed", "analyse_many"),
    ("tristock.designs.trimmed.answers", "analyse"),
    ("tristock.designs.tuned.report", "analyse"),
)
EXAMPLES = ("demo", "clamped", "comparator", "duty", "trimmed", "tuned")


def timed_analyses(spent: list[float]) -> None:
    """Wrap every answer analysis so that its time is added to ``spent[0]``."""
    for module_name, name in ANALYSES:
        module = importlib.import_module(module_name)
        inner: Callable[..., Any] = getattr(module, name)

        def wrapper(*args: Any, _inner: Callable[..., Any] = inner, **kwargs: Any) -> Any:
            t0 = time.perf_counter()
            try:
                return _inner(*args, **kwargs)
            finally:
                spent[0] += time.perf_counter() - t0

        setattr(module, name, wrapper)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", default=",".join(EXAMPLES))
    parser.add_argument("--limits", default="0.05,0.2,1")
    args = parser.parse_args()
    limits = [float(x) for x in args.limits.split(",")]
    catalog = load_catalog(demo_catalog_dir())
    spent = [0.0]
    timed_analyses(spent)
    print(f"{'example':<11} {'limit':>7} {'wall':>8} {'re-check':>9} {'overrun':>8}  proven  "
          "answers  infeasible")  # fmt: skip
    worst = 0.0
    for name in args.examples.split(","):
        spec = load_spec(example_spec_path(name))
        design(spec, catalog, time_limit_s=min(limits), distinct=True)  # imports, tables
        for limit in limits:
            forget()
            spent[0] = 0.0
            t0 = time.perf_counter()
            result = design(spec, catalog, time_limit_s=limit, distinct=True)
            wall = time.perf_counter() - t0
            over = wall - spent[0] - limit
            worst = max(worst, over / limit)
            print(
                f"{name:<11} {limit:>6.2f}s {wall * 1e3:>6.0f}ms {spent[0] * 1e3:>7.0f}ms "
                f"{over * 1e3:>+6.0f}ms  {result.search.proven_optimal!s:<6}  "
                f"{len(result.candidates):>7}  {result.infeasible is not None}",
                flush=True,
            )
    print(f"largest overrun beyond limit and re-check: {worst:+.1%} of the limit")
    return 0


if __name__ == "__main__":
    sys.exit(main())
