"""The jobs: fixed designs (``fixed``), trimmed (``trimmed``), tuned (``tuned``) and
re-optimisation (``reoptimise``), reported through ``candidate`` and ``results``.

``design(spec, catalog)`` is the one entry point: a spec with ``[trim]`` is searched by
``trimmed``, one with ``[tuning]`` by ``tuned``, any other by ``fixed``; all three return the
same result model.
"""

from __future__ import annotations

from tristock.designs.fixed import DEFAULT_ENGINE, DEFAULT_TIME_LIMIT_S, Engine, design_fixed
from tristock.designs.results import Candidate, DesignResult, SavedDesign
from tristock.spec.limits import default_time_limit_s
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
        result = design_fixed(
            spec,
            catalog,
            engine=engine,
            time_limit_s=time_limit_s,
            samples=samples,
            seed=seed,
            distinct=distinct,
        )
    for c in result.candidates:
        c.design_file = saved_design(spec, c)
    return result


def saved_design(spec: Spec, c: Candidate) -> SavedDesign:
    """The DESIGN file of candidate ``c``: its parts by stock code, at the trimmed design's
    nominal wiper, a tuned design's mid dial (wiper 0.5, range C1: an end of the dial may
    sit at the edge of oscillating), other designs wiper 0, range C1."""
    wiper = 0.5 if spec.tuning is not None else 0.0
    if c.trim is not None:
        wiper = c.trim.wiper_nominal
    return SavedDesign(spec=spec, parts={k: p.id for k, p in c.parts.items()}, wiper=wiper)


__all__ = ["DEFAULT_ENGINE", "DEFAULT_TIME_LIMIT_S", "design", "saved_design"]
