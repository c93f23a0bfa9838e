"""The jobs: fixed designs (``fixed``), trimmed (``trimmed``), tuned (``tuned``) and
re-optimisation (``reoptimise``), reported through ``candidate`` and ``results``.

``design(spec, catalog)`` is the one entry point: a spec with ``[trim]`` is searched by
``trimmed``, one with ``[tuning]`` by ``tuned``, any other by ``fixed`` (on the circuit its
``[circuit]`` names, or with ``topology = "any"`` on every searchable circuit, the answers
merged: ``merged``); all three return the same result model.
"""

from __future__ import annotations

import time

from tristock.circuits import spec_topologies
from tristock.circuits.topology import Topology
from tristock.designs.fixed import DEFAULT_ENGINE, DEFAULT_TIME_LIMIT_S, Engine, design_fixed
from tristock.designs.results import Candidate, DesignResult, Infeasible, SavedDesign, SearchInfo
from tristock.spec.limits import default_time_limit_s
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def design(
    spec: Spec,
    catalog: Catalog,
    *,
    engine: Engine = DEFAULT_ENGINE,
    time_limit_s: float | None = None,
    samples: int = 4000,
    seed: int = 0,
    distinct: bool = False,
) -> DesignResult:
    """Best ``spec.ranking.top`` designs from ``catalog``, optimal under the full model, by
    the job the spec asks for (``engine`` applies to fixed designs); every candidate carries
    its DESIGN file (``design_file``). ``distinct``: the top are distinct designs, each with
    its variants (``designs.variants``; the CLI's and the API's default), else every variant
    ranks on its own. ``time_limit_s``: None takes
    ``tristock.spec.limits.default_time_limit_s`` of the spec's job (5 s; 30 s tuned)."""
    if time_limit_s is None:
        time_limit_s = default_time_limit_s(spec.tuning is not None)
    if spec.trimmed:
        # Loaded on use, like the tuned search below (it brings scipy.optimize).
        from tristock.designs.trimmed import design_trimmed

        result = design_trimmed(
            spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed, distinct=distinct
        )
    elif spec.tuning is not None:
        # Loaded on use: the tuned search is the heaviest import and most runs never need it.
        from tristock.designs.tuned import design_tuned

        result = design_tuned(
            spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed, distinct=distinct
        )
    else:
        topologies = searchable(spec)
        deadline = time.perf_counter() + time_limit_s
        results = []
        for n, topology in enumerate(topologies):
            # each circuit gets an equal share of the time left
            share = time_limit_s
            if len(topologies) > 1:
                share = max(deadline - time.perf_counter(), 0.0) / (len(topologies) - n)
            results.append(
                design_fixed(
                    spec,
                    catalog,
                    engine=engine,
                    time_limit_s=share,
                    samples=samples,
                    seed=seed,
                    distinct=distinct,
                    topology=topology,
                )
            )
        result = results[0] if len(results) == 1 else merged(spec, topologies, results)
    for c in result.candidates:
        c.design_file = saved_design(spec, c)
    return result


def searchable(spec: Spec) -> list[Topology]:
    """The circuits the spec's ``[circuit]`` asks to search; SpecError naming the field for
    one the exact search does not cover yet (and for a duty band on a 50 % circuit)."""
    c = spec.circuit
    if c.duty_tolerance_pct is not None and not c.set_duty:
        raise SpecError(
            [
                "circuit.duty_tolerance_pct: a duty band is searched for a set duty "
                "(duty_pct other than 50) only; the 50 % circuits' duty is reported, not searched"
            ]
        )
    topologies = spec_topologies(spec)
    for t in topologies:
        if t.search_form() is None:
            raise SpecError([f"circuit: the {t.name} circuit is modelled but not searched yet"])
    return topologies


def merged(spec: Spec, topologies: list[Topology], results: list[DesignResult]) -> DesignResult:
    """One answer from each circuit's own (``topology = "any"``): every candidate in the
    order of the ranking (score; for the yield ranking, yield first), ties by circuit in
    ``TOPOLOGIES`` order, then each circuit's own rank; the first ``top`` kept, renumbered.
    Proven when every circuit's search is; infeasible reasons prefixed with their circuit."""
    pool = [(t, c) for t, r in zip(topologies, results, strict=True) for c in r.candidates]
    order = {t.name: n for n, t in enumerate(topologies)}

    def key(item: tuple[Topology, Candidate]) -> tuple[float, int, int, int]:
        t, c = item
        first = -c.yield_fraction if spec.ranking.by == "yield" else 0.0
        return (first, c.score, order[t.name], c.rank)

    chosen = [c for _, c in sorted(pool, key=key)[: spec.ranking.top]]
    for rank, c in enumerate(chosen, start=1):
        c.rank = rank
    infos = [r.search for r in results]
    proven = all(i.proven_optimal for i in infos)
    reasons = [
        f"{t.name}: {line}"
        for t, r in zip(topologies, results, strict=True)
        if r.infeasible is not None
        for line in r.infeasible.reasons
    ]
    return DesignResult(
        spec=spec,
        candidates=chosen,
        infeasible=Infeasible(reasons=reasons) if not chosen and proven else None,
        search=SearchInfo(
            engine=infos[0].engine,
            proven_optimal=proven,
            elapsed_s=round(sum(i.elapsed_s for i in infos), 4),
            combinations=sum(i.combinations for i in infos),
            evaluated=sum(i.evaluated for i in infos),
            score_resolution=infos[0].score_resolution,
            dropped_by_full_model=sum(i.dropped_by_full_model for i in infos),
            time_limit_s=round(sum(i.time_limit_s for i in infos), 6),
            distinct=infos[0].distinct,
        ),
        cautions=results[0].cautions,
    )


def saved_design(spec: Spec, c: Candidate) -> SavedDesign:
    """The DESIGN file of candidate ``c``: its parts by stock code, at the trimmed design's
    nominal wiper, a tuned design's mid dial (wiper 0.5, range C1: an end of the dial may
    sit at the edge of oscillating), other designs wiper 0, range C1."""
    wiper = 0.5 if spec.tuning is not None else 0.0
    if c.trim is not None:
        wiper = c.trim.wiper_nominal
    return SavedDesign(
        spec=spec, parts={k: p.id for k, p in c.parts.items()}, wiper=wiper, topology=c.topology
    )


__all__ = ["DEFAULT_ENGINE", "DEFAULT_TIME_LIMIT_S", "design", "saved_design"]
