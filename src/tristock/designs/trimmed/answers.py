"""``design_trimmed``: the trimmed search end to end, and how an answer is reported."""

from __future__ import annotations

import time
from collections.abc import Hashable

from tristock.analysis.bundle import analyse
from tristock.designs.candidate import CAUTIONS, candidate
from tristock.designs.results import Candidate, DesignResult, Infeasible, SearchInfo, TrimOut
from tristock.designs.trimmed.checks import frequency_range
from tristock.designs.trimmed.context import TrimContext, trim_context
from tristock.designs.trimmed.explain import trimmed_reasons
from tristock.designs.trimmed.rows import row_design
from tristock.designs.trimmed.walk import Accepted, TrimSearch, walk
from tristock.designs.variants import distinct_top, variant_key, variants_out
from tristock.search.model import SCORE_RESOLUTION
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

ENGINE = "enumerate-trim"


def trimmed_candidate(
    ctx: TrimContext, found: Accepted, rank: int, *, samples: int, seed: int
) -> Candidate:
    """One answer as reported: the analysis at its nominal wiper, and the trim figures."""
    spec = ctx.spec
    assert spec.trim is not None
    d = row_design(ctx, found.row, 0)
    row = found.row
    c = candidate(spec, d, analyse(d, spec, samples=samples, seed=seed), rank, int(row.res_q[0]))
    c.trim = TrimOut(
        wiper_nominal=d.wiper,
        range_hz=frequency_range(d, spec),
        reach_hz=list(found.reach),
        margin_pct=spec.trim.margin_pct,
        resolution_pct_per_pct=float(row.resolution[0]),
        drift_after_trim_pct=100 * float(row.drift[0]),
    )
    return c


def search_space(ctx: TrimContext) -> int:
    """Combinations of eligible parts: |U1| x |R|³ x |C1| x |RV1|."""
    m = ctx.model
    return len(m.opamps) * len(m.resistors) ** 3 * len(m.capacitors) * len(ctx.pots)


def design_trimmed(
    spec: Spec,
    catalog: Catalog,
    *,
    time_limit_s: float,
    samples: int = 4000,
    seed: int = 0,
    distinct: bool = False,
) -> DesignResult:
    """The ``spec.ranking.top`` best trimmed designs, optimal under the full model (see the
    ``tristock.designs.trimmed`` docstring); with ``distinct`` the best ``top`` distinct
    designs (``designs.variants``). The time limit bounds the search and the coverage
    checks; the analysis of each answer reported comes on top."""
    assert spec.trim is not None
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    ctx = trim_context(spec, catalog)
    search = TrimSearch(ctx, deadline)

    def classify(found: Accepted) -> Hashable:
        return variant_key(row_design(ctx, found.row, 0))

    walked = walk([search], spec.ranking.top, deadline, classify=classify if distinct else None)
    boards = [row_design(ctx, found.row, 0) for found in walked.accepted]
    if distinct:
        chosen = distinct_top(boards, spec.ranking.top)
    else:
        chosen = [(n, []) for n in range(len(boards))]
    candidates = []
    for rank, (n, others) in enumerate(chosen, start=1):
        c = trimmed_candidate(ctx, walked.accepted[n], rank, samples=samples, seed=seed)
        c.variants = variants_out(boards[n], others)
        candidates.append(c)
    infeasible = None
    if not candidates and walked.proven:
        infeasible = Infeasible(reasons=trimmed_reasons([search], catalog, walked.dropped))
    return DesignResult(
        spec=spec,
        candidates=candidates,
        infeasible=infeasible,
        search=SearchInfo(
            engine=ENGINE,
            proven_optimal=walked.proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=search_space(ctx),
            evaluated=search.stats.evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=walked.dropped,
            time_limit_s=time_limit_s,
            distinct=distinct,
        ),
        cautions=CAUTIONS,
    )
