"""The jobs: fixed designs (``fixed``), trimmed (``trimmed``), tuned (``tuned``) and
re-optimisation (``reoptimise``), reported through ``candidate`` and ``results``.

``design(spec, catalog)`` is the one entry point: a spec with ``[trim]`` is searched by
``trimmed``, one with ``[tuning]`` by ``tuned``, any other by ``fixed``; all three return the
same result model.
"""

from __future__ import annotations

from tristock.designs.fixed import DEFAULT_ENGINE, DEFAULT_TIME_LIMIT_S, Engine, design_fixed
from tristock.designs.results import DesignResult
from tristock.designs.trimmed import design_trimmed
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def design(
    spec: Spec,
    catalog: Catalog,
    *,
    engine: Engine = DEFAULT_ENGINE,
    time_limit_s: float = DEFAULT_TIME_LIMIT_S,
    samples: int = 4000,
    seed: int = 0,
) -> DesignResult:
    """Best ``spec.ranking.top`` designs from ``catalog``, optimal under the full model, by
    the job the spec asks for (``engine`` applies to fixed designs)."""
    if spec.trimmed:
        return design_trimmed(spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed)
    if spec.tuning is not None:
        # Loaded on use: the tuned search is the heaviest import and most runs never need it.
        from tristock.designs.tuned import design_tuned

        return design_tuned(spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed)
    return design_fixed(
        spec, catalog, engine=engine, time_limit_s=time_limit_s, samples=samples, seed=seed
    )


__all__ = ["DEFAULT_ENGINE", "DEFAULT_TIME_LIMIT_S", "design"]
