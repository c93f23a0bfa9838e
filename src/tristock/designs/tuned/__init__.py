"""Panel-tuned designs: one pot RV1 sweeps each range, a switch picks one capacitor per range.

Shared parts U1, R1, R2, R3, RV1 (and, for the divider control, the end stop R4); range
capacitors C1..Cn, C1 the largest (the lowest range). The pot's ends (``circuit.timing_network``):
series, top of the range at α = 0 (R_eff = R3), bottom at α = 1 (R_eff = R3 + RV); divider,
top at α = 1 (β = 1, R_eff = R3), bottom at α = 0 (β = R4/(R4 + RV), R_eff = R3 + RV∥R4).

A design is accepted when (each rule evaluated by the full model, ``circuit.predict`` through
the pot network, as ``analyse`` sees the board):

- at nominal values, 25 °C and nominal rails, at every wiper position of every range: the
  loop oscillates, the triangle amplitude is in its band, its peaks stay inside the
  integrator's swing, the integrator slews faster than each ramp, op-amp timing is at most
  ``limits.max_timing_share`` of the period, and the range capacitor's rating covers the
  peak with the amplitude margin (``dial``);
- every range is guaranteed over the analysis's spread box at both ends of the dial
  (guaranteed ends gl < gh, ``coverage``), the ranges cover low_hz..high_hz, each reaches into
  the span, and neighbours overlap by ``overlap_pct`` between guaranteed ends, so at every
  point of the box (``chains.covers``);
- the amplitude guarantee holds (``coverage``), stock covers the build (a code in several
  positions counted once per position) and the cost is within ``limits.max_cost``.

Ranking: fewest ranges (with ``ranges = "auto"`` the fewest any accepted design has; every
answer has that many), then cost, then evenness (the smallest largest excess overlap of
neighbouring ranges, at nominal values), then stock codes. The search is exact over the whole
catalog under that definition: every shared-part combination and every capacitor chain is
either decided by the verdict in rank order or left out by a bound proven in ``bounds``,
``cores`` and ``ranges`` (``search``), and the walk stops only when the ``top``-th accepted
design ranks before everything not yet decided. A search cut by its time limit says
``proven_optimal: false`` and never calls the spec infeasible.
"""

from __future__ import annotations

import time
from collections.abc import Hashable, Sequence
from typing import TYPE_CHECKING

from tristock.circuits.board import Design
from tristock.designs.candidate import CAUTIONS
from tristock.designs.results import DesignResult, Infeasible, SearchInfo
from tristock.designs.tuned.cores import build_cores
from tristock.designs.tuned.coverage import RangeVerdict, proxy_spec_at
from tristock.designs.tuned.model import MAX_RANGES, build_tuned_model
from tristock.designs.tuned.report import (
    DIAL_POINTS,
    design_from,
    dial_law,
    reasons,
    tuned_candidate,
)
from tristock.designs.tuned.search import Found, walk
from tristock.designs.tuned.verdict import Verdicts
from tristock.designs.variants import distinct_top, variant_key, variants_out
from tristock.search.model import SCORE_RESOLUTION
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

if TYPE_CHECKING:
    from tristock.designs.results import ReoptimiseResult

__all__ = [
    "DIAL_POINTS",
    "MAX_RANGES",
    "design_tuned",
    "dial_law",
    "proxy_spec_at",
    "reoptimise_tuned",
]


def design_tuned(
    spec: Spec,
    catalog: Catalog,
    *,
    time_limit_s: float,
    samples: int = 2000,
    seed: int = 0,
    distinct: bool = False,
) -> DesignResult:
    """Best panel-tuned designs (see the module docstring); with ``distinct`` the best
    ``top`` distinct designs (``designs.variants``)."""
    assert spec.tuning is not None
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    model = build_tuned_model(spec, catalog)
    decide = Verdicts(model, samples, seed)

    def classify(f: Found) -> Hashable:
        return variant_key(design_from(model, f.row, f.chain))

    found = walk(model, spec.ranking.top, deadline, decide, classify if distinct else None)
    boards: list[Design] = [design_from(model, f.row, f.chain) for f, _ in found.accepted]
    if distinct:
        chosen = distinct_top(boards, spec.ranking.top)
    else:
        chosen = [(n, []) for n in range(len(boards))]
    candidates = []
    for rank, (n, others) in enumerate(chosen, start=1):
        f, detail = found.accepted[n]
        verdicts = [v for v in detail if isinstance(v, RangeVerdict)]
        c = tuned_candidate(spec, boards[n], verdicts, rank, f.cost, samples, seed)
        c.variants = variants_out(boards[n], others)
        candidates.append(c)
    infeasible = None
    if not candidates and found.proven:
        fewest_found = None
        if spec.tuning.ranges != "auto":
            fewest_found = _fewest_that_work(spec, catalog, deadline)
        cores = build_cores(model) if model.opamps and model.pots else None
        bound = cores.min_fewest() if cores is not None else MAX_RANGES + 1
        infeasible = Infeasible(reasons=reasons(model, bound, found.dropped, fewest_found))
    return DesignResult(
        spec=spec,
        candidates=candidates,
        infeasible=infeasible,
        search=SearchInfo(
            engine="tuned-exact",
            proven_optimal=found.proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=found.combinations,
            evaluated=found.evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=found.dropped,
            time_limit_s=time_limit_s,
            distinct=distinct,
        ),
        cautions=CAUTIONS,
    )


def _fewest_that_work(spec: Spec, catalog: Catalog, deadline: float) -> int | None:
    """With a fixed range count that has no design: the fewest count that has one, if the
    time left finds it."""
    assert spec.tuning is not None
    left = deadline - time.perf_counter()
    if left <= 0:
        return None
    auto = spec.model_copy(
        update={
            "tuning": spec.tuning.model_copy(update={"ranges": "auto"}),
            "ranking": spec.ranking.model_copy(update={"top": 1}),
        }
    )
    model = build_tuned_model(auto, catalog)
    found = walk(model, 1, time.perf_counter() + left, Verdicts(model, 200, 0))
    return found.ranges if found.accepted else None


def reoptimise_tuned(
    spec: Spec,
    catalog: Catalog,
    current: dict[str, str],
    *,
    without: Sequence[str] = (),
    boards: int | None = None,
    top: int | None = None,
    time_limit_s: float = 5.0,
    samples: int = 4000,
) -> ReoptimiseResult:
    """See ``tristock.designs.tuned.reoptimise.reoptimise_tuned`` (imported when first called)."""
    from tristock.designs.tuned.reoptimise import reoptimise_tuned as run

    return run(
        spec, catalog, current, without=without, boards=boards, top=top,
        time_limit_s=time_limit_s, samples=samples,
    )  # fmt: skip
