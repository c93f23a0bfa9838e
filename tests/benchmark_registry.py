"""Benchmark: the impact of one emptied stock code on 1,000 released designs.

    python tests/benchmark_registry.py [--designs 1000] [--seed 0] [--code ID]

Seeds a registry (SQLite in a temp folder) with released designs of mixed kinds on the demo
catalog: fixed designs from searches of seeded random specs (1..8 kHz, 3..8 Vpp, the demo's
limits) and trimmed ones (2..8 kHz on the trimmed example's rails), up to ten answers of each
search, each with a seeded planned build of 10..100 boards; the search's full-model analysis
is the release snapshot. Stock is ten times the demo's and at least every planned build's
need; then the most widely used resistor or capacitor code (or ``--code``) is emptied with a
what-if, and the impact is timed: in-process, on a 1-worker and on a 2-worker LocalCluster.
Prints the affected count (only those are re-solved), the per-design cost, the joint
allocation's solve time and the 1 -> 2 worker ratio. Not a test: figures for the README.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

from tristock.designs import design
from tristock.designs.results import Candidate
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.registry import Registry
from tristock.registry.impact import ImpactSettings, impact, planned_needs
from tristock.registry.impact_report import ImpactReport
from tristock.registry.records import Draft
from tristock.registry.release import catalog_fingerprint, kind_of, with_stock
from tristock.spec.loading import load_spec, parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog

#: The demo's stock counts times this: replacements for hundreds of builds exist.
STOCK_SCALE = 10


def random_spec(rng: np.random.Generator, trimmed: bool) -> Spec:
    data = load_spec(example_spec_path("trimmed" if trimmed else "demo")).model_dump(mode="json")
    low, high = (2e3, 8e3) if trimmed else (1e3, 8e3)
    data["frequency"]["target_hz"] = float(np.exp(rng.uniform(np.log(low), np.log(high))))
    data["triangle"]["amplitude_vpp"] = round(float(rng.uniform(3.0, 8.0)), 2)
    data["ranking"]["top"] = 10
    if not trimmed:
        data["limits"]["max_cost"] = None
    return parse_spec(data)


def draft_of(name: str, spec: Spec, c: Candidate, boards: int, fingerprint: str) -> Draft:
    parts = {d: p.id for d, p in c.parts.items()}
    layout: dict[str, Any] = {"parts": parts}
    if c.trim is not None:
        layout["wiper"] = c.trim.wiper_nominal
    data = spec.model_dump(mode="json")
    data["build"]["boards"] = boards
    return Draft(
        name=name,
        kind=kind_of(spec),
        boards=boards,
        note="benchmark",
        spec=data,
        design=layout,
        designator_pieces={d: p.pieces_per_board if d == "U1" else 1 for d, p in c.parts.items()},
        analysis={
            "predicted": c.predicted.model_dump(mode="json"),
            "worst_case": c.worst_case,
            "yield_fraction": c.yield_fraction,
            "cost": c.cost,
        },
        catalog_fingerprint=fingerprint,
    )


def seed_registry(registry: Registry, catalog: Catalog, count: int, seed: int) -> dict[str, int]:
    rng = np.random.default_rng(seed)
    fingerprint = catalog_fingerprint(catalog)
    kinds = {"fixed": 0, "trimmed": 0}
    seen: set[tuple[str, ...]] = set()
    n = 0
    while n < count:
        trimmed = rng.uniform() < 0.15
        spec = random_spec(rng, trimmed)
        for c in design(spec, catalog, time_limit_s=10.0).candidates:
            key = tuple(sorted(p.id for p in c.parts.values()))
            if key in seen or n >= count:
                continue
            seen.add(key)
            boards = int(rng.integers(10, 101))
            registry.write(draft_of(f"osc-{n:04d}", spec, c, boards, fingerprint), source="release")
            kinds[kind_of(spec)] += 1
            n += 1
    return kinds


def figures(label: str, r: ImpactReport, wall: float) -> None:
    work = [w.seconds for w in r.work]
    p = r.proposal
    print(f"{label}: {wall:.1f} s wall; {len(work)} designs re-solved, per design median "
          f"{statistics.median(work):.3f} s, p90 {np.percentile(work, 90):.3f} s, sum "
          f"{sum(work):.1f} s")  # fmt: skip
    if p is None:
        print(f"   no proposal: {r.no_proposal_reason}")
    else:
        print(f"   proposal: {p.total_changes} changes, lower bound {p.lower_bound}, "
              f"proven {p.proven}; joint solve {p.solve_s * 1e3:.1f} ms, "
              f"bound {p.bound_s * 1e3:.1f} ms")  # fmt: skip


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--designs", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--code", help="the stock code to empty (default: the most used passive)")
    ap.add_argument("--time-limit", type=float, default=5.0)
    args = ap.parse_args()
    demo = load_catalog(demo_catalog_dir())
    with tempfile.TemporaryDirectory() as folder:
        registry = Registry.open(url=str(Path(folder) / "registry.sqlite"))
        t0 = time.perf_counter()
        kinds = seed_registry(registry, demo, args.designs, args.seed)
        print(f"seeded {args.designs} designs {kinds} in {time.perf_counter() - t0:.1f} s")
        t0 = time.perf_counter()
        active = registry.active()
        print(f"registry read of the active designs: {time.perf_counter() - t0:.2f} s")
    needs = planned_needs(active)
    catalog = with_stock(
        demo, {c: max(demo.get(c).stock, sum(v.values())) for c, v in needs.items()}
    )
    users = sorted(
        ((len(v), c) for c, v in needs.items() if demo.kind_of(c) in ("resistors", "capacitors")),
        reverse=True,
    )
    print("most used passives: " + ", ".join(f"{c} ({n})" for n, c in users[:5]))
    code = args.code or users[0][1]
    what_if = {code: (catalog.get(code).stock, 0)}
    settings: dict[str, Any] = {"time_limit_s": args.time_limit, "joint_time_limit_s": 30.0}
    t0 = time.perf_counter()
    quiet = impact(active, catalog, ImpactSettings(**settings))
    print(f"scan with nothing over-subscribed: {(time.perf_counter() - t0) * 1e3:.1f} ms, "
          f"{len(quiet.work)} designs re-solved")  # fmt: skip
    print(f"emptied {code}: used by {len(needs[code])} of {len(active)} designs")
    walls: dict[str, float] = {}
    reports = {}
    for label, extra in (("in-process", {}), ("LocalCluster 1 worker", {"workers": 1}),
                         ("LocalCluster 2 workers", {"workers": 2})):  # fmt: skip
        t0 = time.perf_counter()
        reports[label] = impact(active, catalog, ImpactSettings(**settings, **extra), what_if)
        walls[label] = time.perf_counter() - t0
        figures(label, reports[label], walls[label])
    one, two = walls["LocalCluster 1 worker"], walls["LocalCluster 2 workers"]
    print(f"1 -> 2 workers: {one / two:.2f}x faster (wall, cluster start included)")
    r = reports["in-process"]
    estimate = statistics.median(w.seconds for w in r.work) * len(active)
    print(f"incremental: {len(r.work)} of {len(active)} designs re-solved; re-solving all would "
          f"take about {estimate:.0f} s at the median per-design cost")  # fmt: skip
    same = {k: v.model_dump(exclude={"elapsed_s", "scheduler", "work"}) for k, v in reports.items()}
    for v in same.values():
        if v["proposal"]:
            v["proposal"].pop("solve_s")
            v["proposal"].pop("bound_s")
    print(f"identical proposals on all three: {len({repr(v) for v in same.values()}) == 1}")


if __name__ == "__main__":
    main()
