"""How the fixed search scales with the catalog (a script, not a test).

    python tests/benchmark_scale.py [--sizes 1000 4000 16000] [--capacitors 2000]
        [--opamps 200] [--time-limit 5] [--limits 0.25 0.5 1 2] [--runs 1] [--seed 0]

Each size runs in its own process (``--one``) so that its peak RSS (``resource.getrusage``,
ru_maxrss) is its own. A seeded generator builds the catalog in memory: ``n`` resistors drawn
from the IEC 60063 E24 and E96 values over 10 Ω .. 1 MΩ (several stock codes per value, each
with its own tolerance 0.1/0.5/1/5 %, tempco, cost and stock), ``--capacitors`` C0G and PP
parts from the E12/E24 values over 100 pF .. 1 µF, and ``--opamps`` op amps with parameters
drawn around the demo stock room's classes (invented codes GA-Snnn). The spec is the bundled
demo (2.5 kHz ±2 %, 6 Vpp ±5 %, ±12 V, balanced ranking, top 10).

Prints, per size: the search time (``build_model`` + ``enumerate_top``) and the ``design()``
time under ``--time-limit``, whether the top is proven, the rows opened (``evaluated``) and
scored by the full model, and the peak RSS (measured before the time-limit runs); then the
exponents b of time ∝ R^b and RSS ∝ R^b fitted by least squares in log space over the sizes.
Then, per size and per limit of ``--limits``, a ``design()`` under that limit: its wall time,
the re-check (the analysis of the answers kept, which runs after the search's deadline: time
spent in ``designs.fixed.analyse``), the overrun = wall - re-check - limit, and whether the
answer is proven, how many answers, and whether it (wrongly) reports the spec infeasible.
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

from tristock.stock.catalog import Catalog
from tristock.stock.eseries import values
from tristock.stock.parts import Capacitor, OpAmp, Resistor

TOLERANCES = (0.1, 0.5, 1.0, 5.0)
TEMPCOS = {0.1: 25.0, 0.5: 50.0, 1.0: 100.0, 5.0: 200.0}


def resistors(rng: np.random.Generator, n: int) -> list[Resistor]:
    e24 = values("E24", 10.0, 1e6)
    e96 = values("E96", 10.0, 1e6)
    out = []
    for i in range(n):
        tol = float(rng.choice(TOLERANCES))
        table = e24 if tol == 5.0 or rng.random() < 0.3 else e96
        value = float(table[int(rng.integers(len(table)))])
        cost = round((0.002 + 0.03 / tol) * float(rng.uniform(0.7, 1.5)), 4)
        out.append(
            Resistor(
                id=f"GR-{i:05d}",
                value_ohm=value,
                tolerance_pct=tol,
                tempco_ppm=TEMPCOS[tol],
                series="E24" if table is e24 else "E96",
                power_w=0.1,
                package="0603",
                unit_cost=cost,
                stock=int(rng.choice((0, 500, 2000, 10000))),
            )
        )
    return out


def capacitors(rng: np.random.Generator, n: int) -> list[Capacitor]:
    c0g = values("E12", 100e-12, 10e-9)
    film = values("E24", 1e-9, 1e-6)
    out = []
    for i in range(n):
        if rng.random() < 0.5:
            value, dielectric, tempco = float(rng.choice(c0g)), "C0G", 0.0
            tol, volts, cost = float(rng.choice((1.0, 2.0, 5.0))), 50.0, 0.01
        else:
            value, dielectric, tempco = float(rng.choice(film)), "PP", -200.0
            tol, volts, cost = float(rng.choice((1.0, 2.0, 5.0))), 100.0, 0.2
        out.append(
            Capacitor(
                id=f"GC-{i:05d}",
                value_f=value,
                dielectric=dielectric,
                tolerance_pct=tol,
                tempco_ppm=tempco,
                temp_band_pct=None,
                voltage_v=volts,
                package="0805",
                unit_cost=round(cost * float(rng.uniform(0.8, 1.6)) / tol**0.3, 4),
                stock=int(rng.choice((0, 500, 4000))),
            )
        )
    return out


def opamps(rng: np.random.Generator, n: int) -> list[OpAmp]:
    out = []
    for i in range(n):
        slew = float(np.exp(rng.uniform(math.log(0.3), math.log(20.0))))
        out.append(
            OpAmp(
                id=f"GA-S{i:03d}",
                channels=int(rng.choice((1, 2))),
                supply_min_v=float(rng.choice((3.0, 7.0, 10.0))),
                supply_max_v=36.0,
                swing_pos_v=float(rng.uniform(0.1, 1.5)),
                swing_neg_v=float(rng.uniform(0.1, 1.5)),
                slew_v_per_us=slew,
                gbw_hz=float(slew * rng.uniform(0.2e6, 1.0e6)),
                delay_s=float(rng.uniform(0.5e-6, 8e-6)),
                offset_v=float(rng.uniform(0.3e-3, 3e-3)),
                bias_a=float(np.exp(rng.uniform(math.log(1e-11), math.log(8e-8)))),
                output_a=0.02,
                unit_cost=round(float(rng.uniform(0.15, 1.2)), 2),
                stock=int(rng.choice((0, 500, 3000))),
                delay_to_mid_s=None,
            )
        )
    return out


def catalog(seed: int, n_res: int, n_cap: int, n_op: int) -> Catalog:
    rng = np.random.default_rng(seed)
    return Catalog(
        Path(f"generated-{n_res}x{n_cap}x{n_op}-seed{seed}"),
        tuple(resistors(rng, n_res)),
        tuple(capacitors(rng, n_cap)),
        tuple(opamps(rng, n_op)),
    )


def one(args: argparse.Namespace, n_res: int) -> dict[str, object]:
    """Run one size in this process and return its figures."""
    import tristock.designs.fixed as fixed
    from tristock.analysis.memo import forget as forget_remembered
    from tristock.designs import design
    from tristock.examples import example_spec_path
    from tristock.search.enumeration import enumerate_top
    from tristock.search.model import build_model
    from tristock.spec.loading import load_spec

    spec = load_spec(example_spec_path())
    cat = catalog(args.seed, n_res, args.capacitors, args.opamps)
    searches, designs = [], []
    proven, rows, scored, answers = False, 0, 0, 0
    for _ in range(args.runs):
        t0 = time.perf_counter()
        model = build_model(spec, cat)
        found = enumerate_top(model, spec.ranking.top, args.time_limit)
        searches.append(time.perf_counter() - t0)
        forget_remembered()  # the answers' analyses computed afresh
        t0 = time.perf_counter()
        result = design(spec, cat, time_limit_s=args.time_limit)
        designs.append(time.perf_counter() - t0)
        proven, rows, scored = found.proven_optimal, found.evaluated, found.scored
        answers = len(result.candidates)
        design_proven = result.search.proven_optimal
        infeasible = result.infeasible is not None
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    recheck = [0.0]
    analyse = vars(fixed)["analyse_many"]

    def timed_analyse(*a: Any, **k: Any) -> Any:
        t = time.perf_counter()
        try:
            return analyse(*a, **k)
        finally:
            recheck[0] += time.perf_counter() - t

    vars(fixed)["analyse_many"] = timed_analyse
    limits = []
    for limit in args.limits:
        recheck[0] = 0.0
        forget_remembered()
        t0 = time.perf_counter()
        cut = design(spec, cat, time_limit_s=limit)
        wall = time.perf_counter() - t0
        limits.append(
            {
                "limit_s": limit,
                "wall_s": wall,
                "recheck_s": recheck[0],
                "over_s": wall - recheck[0] - limit,
                "proven": cut.search.proven_optimal,
                "answers": len(cut.candidates),
                "infeasible": cut.infeasible is not None,
            }
        )
    vars(fixed)["analyse_many"] = analyse
    return {
        "resistors": n_res,
        "search_s": statistics.median(searches),
        "design_s": statistics.median(designs),
        "proven": proven,
        "design_proven": design_proven,
        "infeasible": infeasible,
        "rows_opened": rows,
        "rows_scored": scored,
        "answers": answers,
        "peak_rss_mib": peak,
        "limits": limits,
    }


def slope(xs: list[float], ys: list[float]) -> float:
    """Least-squares b of ln y = a + b·ln x."""
    lx, ly = np.log(xs), np.log(ys)
    return float(np.polyfit(lx, ly, 1)[0])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 4000, 16000])
    ap.add_argument("--capacitors", type=int, default=2000)
    ap.add_argument("--opamps", type=int, default=200)
    ap.add_argument("--time-limit", type=float, default=5.0)
    ap.add_argument("--limits", type=float, nargs="*", default=[0.25, 0.5, 1.0, 2.0])
    ap.add_argument("--runs", type=int, default=1)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--one", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.one is not None:
        print(json.dumps(one(args, args.one)))
        return
    print(
        f"capacitors {args.capacitors}, op amps {args.opamps}, time limit {args.time_limit} s, "
        f"seed {args.seed}, median of {args.runs} run(s)"
    )
    print(
        f"{'resistors':>9} {'search':>9} {'design()':>9} {'proven':>7} {'opened':>9} "
        f"{'scored':>8} {'RSS':>9}"
    )
    figures = []
    for n in args.sizes:
        cmd = [sys.executable, __file__, "--one", str(n)]
        cmd += ["--capacitors", str(args.capacitors), "--opamps", str(args.opamps)]
        cmd += ["--time-limit", str(args.time_limit), "--runs", str(args.runs)]
        cmd += ["--seed", str(args.seed), "--limits", *map(str, args.limits)]
        out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout
        f = json.loads(out.splitlines()[-1])
        figures.append(f)
        note = " (infeasible reported!)" if f["infeasible"] else ""
        print(
            f"{n:>9} {f['search_s'] * 1e3:>7.0f}ms {f['design_s'] * 1e3:>7.0f}ms "
            f"{'yes' if f['proven'] else 'no':>7} {f['rows_opened']:>9} {f['rows_scored']:>8} "
            f"{f['peak_rss_mib']:>6.0f}MiB{note}"
        )
    if len(figures) >= 2:
        xs = [float(f["resistors"]) for f in figures]
        b_search = slope(xs, [f["search_s"] for f in figures])
        b_design = slope(xs, [f["design_s"] for f in figures])
        b_rss = slope(xs, [f["peak_rss_mib"] for f in figures])
        print(
            f"fitted exponents over R: search time {b_search:.2f}, design() {b_design:.2f}, "
            f"peak RSS {b_rss:.2f}"
        )
    if args.limits:
        print("time limits: design() wall, re-check after the deadline, overrun beyond both")
        print(
            f"{'resistors':>9} {'limit':>7} {'wall':>8} {'re-check':>9} {'overrun':>8} "
            f"{'proven':>7} {'answers':>8} {'infeasible':>10}"
        )
        worst = -math.inf
        for f in figures:
            for c in f["limits"]:
                worst = max(worst, c["over_s"] / c["limit_s"])
                print(
                    f"{f['resistors']:>9} {c['limit_s']:>6.2f}s {c['wall_s'] * 1e3:>6.0f}ms "
                    f"{c['recheck_s'] * 1e3:>7.0f}ms {c['over_s'] * 1e3:>+6.0f}ms "
                    f"{'yes' if c['proven'] else 'no':>7} {c['answers']:>8} "
                    f"{'YES' if c['infeasible'] else 'no':>10}"
                )
        print(f"largest overrun beyond limit and re-check: {worst:+.1%} of the limit")


if __name__ == "__main__":
    main()
