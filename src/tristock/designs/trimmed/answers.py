"""``design_trimmed``: the trimmed search end to end, and how an answer is reported."""

from __future__ import annotations

import time

from tristock.analysis.bundle import analyse
from tristock.designs.candidate import CAUTIONS, candidate
from tristock.designs.results import Candidate, DesignResult, Infeasible, SearchInfo, TrimOut
from tristock.designs.trimmed.checks import frequency_range
from tristock.designs.trimmed.context import TrimContext, trim_context
from tristock.designs.trimmed.explain import trimmed_reasons
from tristock.designs.trimmed.rows import row_design
from tristock.designs.trimmed.walk import Accepted, TrimSearch, walk
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
    spec: Spec, catalog: Catalog, *, time_limit_s: float, samples: int = 4000, seed: int = 0
) -> DesignResult:
    """The ``spec.ranking.top`` best trimmed designs, optimal under the full model (see the
    ``tristock.designs.trimmed`` docstring). The time limit bounds the search and the coverage
    checks; the analysis of each answer reported comes on top."""
    assert spec.trim is not None
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    ctx = trim_context(spec, catalog)
    search = TrimSearch(ctx, deadline)
    walked = walk([search], spec.ranking.top, deadline)
    candidates = [
        trimmed_candidate(ctx, found, rank, samples=samples, seed=seed)
        for rank, found in enumerate(walked.accepted, start=1)
    ]
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
        ),
        cautions=CAUTIONS,
    )
