"""Benchmark of the design search (a script, not a test: ``python tests/benchmark_search.py``).

Prints, as compact tables:
(a) median and p90 latency over ``RUNS`` runs of a typical query on the full demo catalog
    (the bundled example spec: top-10, balanced) for ``build_model``, each engine in-process
    after ``build_model`` (``enumerate_top``, ``cpsat_top``) and the whole ``design()`` call,
    with proven_optimal;
(b) the same query by plain exhaustive enumeration (every combination through
    ``model.evaluate`` in chunks) on a cut-down catalog, its time against each engine on that
    catalog, and whether the answers agree;
(c) the combinations in each search space and the rows each engine scored;
(d) peak resident memory (``ru_maxrss`` from ``os.wait4`` in a small launcher) of a process running
    ``tristock design --example --json``, or a subprocess calling ``design()`` on the demo
    when that command is not available.

Wall-clock figures depend on the machine; the run takes about a minute and a half on 2 cores.
"""

from __future__ import annotations

import shutil
import statistics
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from tristock.designs import design
from tristock.search.cpsat import cpsat_top
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.model import SECONDARY_SPAN, SearchModel, build_model
from tristock.search.rows import Rows, evaluate, rank_key
from tristock.spec.loading import load_spec, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "catalogs" / "demo"
EXAMPLE = REPO / "src" / "tristock" / "examples" / "demo.toml"
RUNS = 20
TOP = 10
LIMIT_S = 30.0
CHUNK = 1_000_000

#: Used when the bundled example spec is missing: ±12 V, 2.5 kHz ±2 %, 6 Vpp ±5 %.
FALLBACK_SPEC: dict[str, Any] = {
    "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
    "frequency": {"target_hz": 2500.0, "tolerance_pct": 2.0},
    "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 5.0},
    "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
    "build": {"boards": 100},
    "ranking": {"by": "balanced", "top": TOP},
}


def typical_spec() -> tuple[Spec, str]:
    """The bundled example request (top-10, balanced), or the fallback above."""
    if EXAMPLE.exists():
        spec = load_spec(EXAMPLE)
        ranking = spec.ranking.model_copy(update={"by": "balanced", "top": TOP})
        return spec.model_copy(update={"ranking": ranking}), str(EXAMPLE.relative_to(REPO))
    return parse_spec(FALLBACK_SPEC), "built-in fallback spec"


def timed(fn: Callable[[], Any], runs: int) -> tuple[list[float], Any]:
    """Wall times (s) of ``runs`` calls and the last result."""
    times, out = [], None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return times, out


def p90(times: list[float]) -> float:
    return float(np.percentile(times, 90))


def ms(seconds: float) -> str:
    return f"{seconds * 1e3:9.1f}"


def codes(model: SearchModel, rows: Rows) -> list[tuple[str, ...]]:
    return [rank_key(model, rows, n)[2:] for n in range(len(rows))]


def exhaustive(model: SearchModel, top: int) -> tuple[Rows, int]:
    """Every combination through ``evaluate`` in chunks; the best ``top`` by rank_key, and the
    number of rows scored."""
    shape = (
        len(model.opamps),
        len(model.resistors),
        len(model.resistors),
        len(model.resistors),
        len(model.capacitors),
    )
    total = int(np.prod(shape))
    kept: Rows | None = None
    for start in range(0, total, CHUNK):
        flat = np.arange(start, min(start + CHUNK, total), dtype=np.int64)
        rows = evaluate(model, *np.unravel_index(flat, shape))
        merged = rows if kept is None else Rows.concat([kept, rows])
        if len(merged) > top:
            packed = merged.primary * SECONDARY_SPAN + merged.secondary
            merged = merged.take(packed <= np.partition(packed, top - 1)[top - 1])
        kept = merged
    assert kept is not None
    order = sorted(range(len(kept)), key=lambda n: rank_key(model, kept, n))[:top]
    return kept.take(np.array(order, dtype=np.int64)), total


def cut_down(catalog: Catalog) -> Catalog:
    """Every 4th resistor and every 6th capacitor of the demo, and 3 op amps: about
    60 million combinations after the spec's filters."""
    return Catalog(
        catalog.path,
        catalog.resistors[::4],
        catalog.capacitors[::6],
        tuple(o for o in catalog.opamps if o.id in {"GA-JF2", "GA-GP2", "GA-LN2"}),
    )


def peak_memory() -> tuple[str, float, int]:
    """(what ran, peak RSS in MiB, exit status) of one subprocess."""
    exe = shutil.which("tristock")
    if exe is not None:
        probe = subprocess.run(
            [exe, "design", "--help"], capture_output=True, text=True, check=False
        )
        if probe.returncode == 0 and "--example" in probe.stdout:
            return _rss([exe, "design", "--example", "--json"], "tristock design --example --json")
    code = (
        "from tristock.stock.catalog import load_catalog\n"
        "from tristock.designs import design\n"
        "from tristock.spec.loading import parse_spec\n"
        f"r = design(parse_spec({FALLBACK_SPEC!r}), load_catalog({str(DEMO)!r}))\n"
        "print(r.model_dump_json()[:1])\n"
    )
    return _rss([sys.executable, "-c", code], "python -c 'design(...)' on the demo")


#: A small launcher runs the command: a child forked straight from this (large) process would
#: count this process's pages in its peak RSS until it execs.
_LAUNCHER = (
    "import os, subprocess, sys\n"
    "p = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)\n"
    "_, status, usage = os.wait4(p.pid, 0)\n"
    "print(usage.ru_maxrss, os.waitstatus_to_exitcode(status))\n"
)


def _rss(argv: list[str], label: str) -> tuple[str, float, int]:
    out = subprocess.run(
        [sys.executable, "-c", _LAUNCHER, *argv], capture_output=True, text=True, check=True
    ).stdout.split()
    return label, int(out[0]) / 1024, int(out[1])  # ru_maxrss is KiB on Linux


def main() -> None:
    t_start = time.perf_counter()
    demo = load_catalog(DEMO)
    spec, source = typical_spec()
    print(f"typical query: {source}; top-{TOP}, balanced; {RUNS} runs each")
    print(
        f"  {spec.frequency.target_hz:g} Hz ±{spec.frequency.tolerance_pct:g} %, "
        f"{spec.triangle.amplitude_vpp:g} Vpp ±{spec.triangle.tolerance_pct:g} %, "
        f"{spec.build.boards} boards, max_cost {spec.limits.max_cost}"
    )

    # (a) latency on the full demo catalog
    t_build, model = timed(lambda: build_model(spec, demo), RUNS)
    t_enum, r_enum = timed(lambda: enumerate_top(model, TOP, LIMIT_S), RUNS)
    t_cp, r_cp = timed(lambda: cpsat_top(model, TOP, LIMIT_S), RUNS)
    t_design, r_design = timed(lambda: design(spec, demo), RUNS)
    same = codes(model, r_enum.rows) == codes(model, r_cp.rows)
    print("\n(a) full demo catalog")
    print(f"  {'step':<26}{'median ms':>10}{'p90 ms':>10}  proven_optimal")
    rows_a: list[tuple[str, list[float], object]] = [
        ("build_model", t_build, "-"),
        ("enumerate_top", t_enum, r_enum.proven_optimal),
        ("cpsat_top", t_cp, r_cp.proven_optimal),
        ("design() (default engine)", t_design, r_design.search.proven_optimal),
    ]
    for name, times, proven in rows_a:
        print(f"  {name:<26}{ms(statistics.median(times))} {ms(p90(times))}  {proven}")
    print(f"  engines agree on the top-{TOP}: {same}")

    # (b) exhaustive enumeration on a cut-down catalog
    small = cut_down(demo)
    small_model = build_model(spec, small)
    t0 = time.perf_counter()
    brute, brute_rows = exhaustive(small_model, TOP)
    t_brute = time.perf_counter() - t0
    t_se, s_enum = timed(lambda: enumerate_top(small_model, TOP, LIMIT_S), 5)
    t_sc, s_cp = timed(lambda: cpsat_top(small_model, TOP, LIMIT_S), 5)
    want = codes(small_model, brute)
    print("\n(b) cut-down catalog: exhaustive enumeration against the engines")
    print(
        f"  catalog: {len(small_model.opamps)} op amps, {len(small_model.resistors)} resistors, "
        f"{len(small_model.capacitors)} capacitors eligible; {len(brute)} answers"
    )
    print(f"  {'method':<26}{'time ms':>10}{'x faster':>10}  same top-{TOP}  proven")
    print(f"  {'exhaustive (evaluate)':<26}{ms(t_brute)} {'1':>9}  {'-':>9}  -")
    for name, times, res in (
        ("enumerate_top (median)", t_se, s_enum),
        ("cpsat_top (median)", t_sc, s_cp),
    ):
        med = statistics.median(times)
        agree = codes(small_model, res.rows) == want
        print(f"  {name:<26}{ms(med)} {t_brute / med:>9.0f}  {agree!s:>9}  {res.proven_optimal}")

    # (c) search space and rows scored
    def space(m: SearchModel) -> int:
        return len(m.opamps) * len(m.resistors) ** 3 * len(m.capacitors)

    print("\n(c) combinations and rows scored")
    print(f"  {'catalog':<12}{'combinations':>16}{'enumerate rows':>16}{'cpsat table':>13}")
    results: list[tuple[str, SearchModel, EngineResult, EngineResult]] = [
        ("full demo", model, r_enum, r_cp),
        ("cut-down", small_model, s_enum, s_cp),
    ]
    for name, m, e, c in results:
        print(f"  {name:<12}{space(m):>16,}{e.evaluated:>16,}{c.evaluated:>13,}")
    print(f"  exhaustive on the cut-down catalog scored {brute_rows:,} rows")
    print("  (cpsat table = rows given to CP-SAT as Booleans; its lister scores rows as above)")

    # (d) peak memory of a subprocess
    label, rss_mib, status = peak_memory()
    print("\n(d) peak memory")
    print(f"  {label}: {rss_mib:.0f} MiB max RSS (exit {status})")
    print(f"\ntotal benchmark time {time.perf_counter() - t_start:.0f} s")


if __name__ == "__main__":
    main()
