"""Fixed designs: best parts from a catalog for a spec, each answer re-checked in full.

``design_fixed(spec, catalog)`` builds the search model (``model``), runs one engine (``cpsat``, the
default, or ``enumerate``), then re-evaluates every answer with the full circuit model and the
tolerance analysis; an answer the full model rejects is dropped and the search asks for more.
"""

from __future__ import annotations

import math
import time
from collections.abc import Hashable
from dataclasses import dataclass
from typing import Literal

from tristock.analysis.bundle import analyse_many
from tristock.analysis.montecarlo import yield_count
from tristock.analysis.worstcase import worst_case
from tristock.circuits import spec_topologies
from tristock.circuits.board import AnyBoard, board_from
from tristock.circuits.topology import Topology
from tristock.designs.candidate import CAUTIONS, candidate, guarantee_holds, warnings_for
from tristock.designs.results import DesignResult, Infeasible, SearchInfo
from tristock.designs.variants import distinct_top, variant_key, variants_out
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.explain import infeasible_reasons
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.rows import Rows, empty_rows
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

Engine = Literal["cpsat", "enumerate"]
#: For one design the enumeration's rows come in exact rank order with every constraint
#: applied, so CP-SAT (kept as an independent cross-check, and for problems that couple
#: several designs) only re-derives them, more slowly.
DEFAULT_ENGINE: Engine = "enumerate"
DEFAULT_TIME_LIMIT_S = 5.0


def design_of(model: SearchModel, rows: Rows, n: int) -> AnyBoard:
    """The board of row ``n`` (indices into the model's tables), as its topology builds it."""
    res, cap = model.resistors.parts, model.capacitors.parts
    form = model.form
    integrators = (res[i] for i in rows.integrator_indices(n))
    chosen = (res[rows.i1[n]], res[rows.i2[n]], *integrators, cap[rows.j[n]])
    names = (*form.divider, *form.integrator, form.capacitor)
    parts = {**model.stages[rows.u[n]].parts, **dict(zip(names, chosen, strict=True))}
    return board_from(model.topology, parts)


def run_engine(model: SearchModel, engine: Engine, top: int, time_limit_s: float) -> EngineResult:
    """The engine's best ``top`` rows. A form with two integrator elements (the set-duty
    loop) has one exact lister, ``search.branches``, whichever engine is named. A model the
    deadline cut (``SearchModel.cut``) is not searched: no rows, nothing proven."""
    if model.cut:
        return EngineResult(empty_rows(), False, 0, 0.0)
    if len(model.form.integrator) == 2:
        from tristock.search.branches import branch_top

        return branch_top(model, top, time_limit_s)
    if engine == "cpsat":
        # Loaded on use: OR-Tools (and the pandas it pulls in) is most of a process's start-up.
        from tristock.search.cpsat import cpsat_top

        return cpsat_top(model, top, time_limit_s)
    return enumerate_top(model, top, time_limit_s)


@dataclass
class _Verdict:
    """The full model's re-check of one row: whether it meets the guarantee and, when the
    ranking needs it, its Monte Carlo pass count (an upper bound when ``exact`` is False:
    the count stopped once the row could no longer matter)."""

    ok: bool
    passed: int | None
    exact: bool = True


def _recheck(spec: Spec, design: AnyBoard, samples: int, seed: int, beat: int) -> _Verdict:
    """What the guarantee and the ranking need beyond the search's own acceptance (and no
    check of error severity, ``designs.candidate.warnings_for``). In the
    yield ranking a row must pass more than ``beat`` samples to enter the top; counting
    stops as soon as it cannot (``analysis.yield_count``)."""
    limits = spec.limits
    if any(w.severity == "error" for w in warnings_for(design, spec)):
        return _Verdict(False, None)  # a check of error severity: not a design to offer
    if limits.guarantee == "worst_case":
        wc = worst_case(design, spec)  # remembered for the analysis (``analysis.memo``)
        if not guarantee_holds(spec, wc, None):
            return _Verdict(False, None)
    if limits.guarantee != "yield" and spec.ranking.by != "yield":
        return _Verdict(True, None)
    allowed = samples
    if limits.guarantee == "yield":
        allowed = math.floor((1.0 - limits.min_yield) * samples + 1e-9)
    if spec.ranking.by == "yield":
        allowed = min(allowed, samples - beat - 1)
    passed, exact = yield_count(
        design, spec, samples=samples, seed=seed, max_failures=max(allowed, -1)
    )
    if limits.guarantee == "yield" and passed < limits.min_yield * samples:
        return _Verdict(False, passed, exact)
    return _Verdict(True, passed, exact)


def _walk(
    spec: Spec,
    model: SearchModel,
    rows: Rows,
    verdicts: dict[tuple[str, ...], _Verdict],
    samples: int,
    seed: int,
    deadline: float,
    distinct: bool,
) -> tuple[list[tuple[AnyBoard, int, int | None]], int, bool, bool]:
    """Re-check rows in rank order until the top is settled.

    Returns the rows that pass (design, score, yield count), how many were dropped, whether
    the top is settled (no unchecked row can rank above the ``top``-th kept class) and
    whether the deadline cut the walk. A class is one row, or with ``distinct`` every variant
    of one design (``designs.variants``), ranked where its best row ranks. In the yield
    ranking the key is (-yield, search order): a row never checked can at best tie at yield
    1, after every checked row, so the top is settled once ``top`` classes have a kept row
    with every sample passing; a row whose count cannot beat the ``top``-th class's best is
    not counted to the end (it ranks after that class and after its own class's best).
    """
    top = spec.ranking.top
    by_yield = spec.ranking.by == "yield"
    kept: list[tuple[AnyBoard, int, int | None]] = []
    best: dict[Hashable, int] = {}  # class -> best pass count of its kept rows (0 unranked)
    dropped = 0

    def settled() -> bool:
        if not by_yield:
            return len(best) >= top
        return sum(p == samples for p in best.values()) >= top

    for n in range(len(rows)):
        if settled():
            return kept, dropped, True, False
        if time.perf_counter() > deadline and n:
            return kept, dropped, False, True
        d = design_of(model, rows, n)
        ids = tuple(p.id for p in d.parts().values())
        counts = sorted(best.values(), reverse=True)
        beat = counts[top - 1] if by_yield and len(counts) >= top else -1
        if ids not in verdicts or (not verdicts[ids].exact and (verdicts[ids].passed or 0) > beat):
            verdicts[ids] = _recheck(spec, d, samples, seed, beat)
        v = verdicts[ids]
        if not v.ok:
            dropped += 1
        elif v.exact:
            kept.append((d, int(rows.primary[n]), v.passed))
            cls = variant_key(d) if distinct else n
            best[cls] = max(best.get(cls, 0), v.passed or 0)
    return kept, dropped, settled(), False


def design_fixed(
    spec: Spec,
    catalog: Catalog,
    *,
    engine: Engine = DEFAULT_ENGINE,
    time_limit_s: float = DEFAULT_TIME_LIMIT_S,
    samples: int = 4000,
    seed: int = 0,
    distinct: bool = False,
    topology: Topology | None = None,
) -> DesignResult:
    """Best ``spec.ranking.top`` fixed designs from ``catalog``, optimal under the full model;
    ``topology``: the circuit searched (None: the one the spec's ``[circuit]`` names);
    with ``distinct`` the best ``top`` distinct designs (``designs.variants``), each with the
    variants that rank above the last one reported.

    The engines list rows in rank order, each scored by the full model at nominal values;
    the guarantee (worst case over the spread box, Monte Carlo yield) and the yield ranking
    are then decided by the analysis, row by row in that order, until no unchecked row can
    enter the top (``_walk``).
    """
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    model = build_model(spec, catalog, topology or spec_topologies(spec)[0], deadline=deadline)
    top = spec.ranking.top
    want = 2 * top if distinct else top  # distinct: variants take places in the row list
    verdicts: dict[tuple[str, ...], _Verdict] = {}  # a retry re-uses the re-checks done
    evaluated = 0
    while True:
        remaining = max(deadline - time.perf_counter(), 0.0)
        found = run_engine(model, engine, want, remaining)
        evaluated += found.evaluated
        kept, dropped, settled, cut = _walk(
            spec, model, found.rows, verdicts, samples, seed, deadline, distinct
        )
        exhausted = len(found.rows) < want
        if settled or exhausted or cut or time.perf_counter() > deadline:
            proven = found.proven_optimal and (settled or exhausted) and not cut
            break
        want *= 4
    if spec.ranking.by == "yield":
        kept.sort(key=lambda k: -(k[2] or 0))  # stable: search order within a yield
    if distinct:
        chosen = distinct_top([d for d, _, _ in kept], top)
    else:
        chosen = [(n, []) for n in range(min(top, len(kept)))]
    boards = [kept[n][0] for n, _ in chosen]
    analyses = analyse_many(boards, spec, samples=samples, seed=seed)
    candidates = []
    for rank, ((n, others), result) in enumerate(zip(chosen, analyses, strict=True), start=1):
        d, score, _ = kept[n]
        c = candidate(spec, d, result, rank, score)
        c.variants = variants_out(d, others)
        candidates.append(c)
    infeasible = None
    if not candidates and proven:
        reasons = infeasible_reasons(model, catalog, dropped, deadline=deadline)
        infeasible = Infeasible(reasons=reasons)
    return DesignResult(
        spec=spec,
        candidates=candidates,
        infeasible=infeasible,
        search=SearchInfo(
            engine=engine,
            proven_optimal=proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=search_space(model),
            evaluated=evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=dropped,
            time_limit_s=time_limit_s,
            distinct=distinct,
        ),
        cautions=CAUTIONS,
    )


def search_space(model: SearchModel) -> int:
    """Combinations of eligible parts: |stages| x |R|^(2 + integrator elements) x |C1|."""
    resistors = len(model.resistors) ** (2 + len(model.form.integrator))
    return int(len(model.opamps) * resistors * len(model.capacitors))


__all__ = ["DEFAULT_ENGINE", "DEFAULT_TIME_LIMIT_S", "design_fixed"]
