"""The design search: best parts from a catalog for a spec, each answer re-checked in full.

``design(spec, catalog)`` builds the search model (``model``), runs one engine (``cpsat``, the
default, or ``enumerate``), then re-evaluates every answer with the full circuit model and the
tolerance analysis; an answer the full model rejects is dropped and the search asks for more.
"""

from __future__ import annotations

import math
import time
from typing import Literal

from tristock.analysis import Analysis, analyse
from tristock.catalog import Catalog
from tristock.design import Design
from tristock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.report import parts_report, warnings_for
from tristock.results import (
    Candidate,
    DesignResult,
    ErrorOut,
    Infeasible,
    PartOut,
    Predicted,
    SearchInfo,
    WarningOut,
)
from tristock.search.cpsat import cpsat_top
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.explain import infeasible_reasons
from tristock.search.model import SCORE_RESOLUTION, Rows, SearchModel, build_model
from tristock.spec import Spec
from tristock.units import format_value

Engine = Literal["cpsat", "enumerate"]
DEFAULT_TIME_LIMIT_S = 5.0

CAUTIONS = [
    "Check every supply rail against the op amp's absolute maximum ratings, including "
    "start-up and fault conditions.",
    "Capacitor voltage ratings and resistor power ratings are checked against the model's "
    "peaks only; derate them as your own practice requires.",
    "Predictions are models: build and measure a prototype before release. Follow local "
    "codes and licensed practice for anything connected to mains or to people.",
]


def part_out(part: Part, pieces: int) -> PartOut:
    """A part as it appears in a result."""
    if isinstance(part, Resistor):
        kind, value, unit, tol = "resistor", part.value_ohm, "Ω", part.tolerance_pct
    elif isinstance(part, Capacitor):
        kind, value, unit, tol = "capacitor", part.value_f, "F", part.tolerance_pct
    elif isinstance(part, Pot):
        kind, value, unit, tol = "pot", part.value_ohm, "Ω", part.tolerance_pct
    else:
        assert isinstance(part, OpAmp)
        kind, value, unit, tol = "opamp", None, "", None
    if value is None:
        ch = "dual" if part.channels >= 2 else "single, two used"  # type: ignore[union-attr]
        display = f"{part.id} ({ch})"
    else:
        extra = f" {part.dielectric}" if isinstance(part, Capacitor) else ""
        display = f"{format_value(value, unit)} {tol:g} %{extra}"
    return PartOut(
        id=part.id,
        kind=kind,
        value=value,
        display=display,
        tolerance_pct=tol,
        unit_cost=part.unit_cost,
        pieces_per_board=pieces,
        stock=part.stock,
    )


def design_of(model: SearchModel, rows: Rows, n: int) -> Design:
    """The Design of row ``n`` (indices into the model's tables)."""
    res, cap = model.resistors.parts, model.capacitors.parts
    return Design(
        u1=model.opamps[rows.u[n]].part,
        r1=res[rows.i1[n]],
        r2=res[rows.i2[n]],
        r3=res[rows.i3[n]],
        c1=cap[rows.j[n]],
    )


def passes(spec: Spec, result: Analysis) -> bool:
    """The full model's verdict on the spec's guarantee."""
    (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
    f0, a0 = spec.target.target_hz, spec.triangle.amplitude_vpp

    def inside(f: float, a: float) -> bool:
        return fa <= math.log(f / f0) <= fb and aa <= math.log(a / a0) <= ab

    p = result.predicted
    if not inside(float(p.frequency_hz), float(p.amplitude_vpp)):
        return False
    if spec.limits.guarantee == "worst_case":
        wc = result.worst_case
        return inside(wc.frequency_hz[0], wc.amplitude_vpp[0]) and inside(
            wc.frequency_hz[1], wc.amplitude_vpp[1]
        )
    if spec.limits.guarantee == "yield":
        return result.yield_fraction >= spec.limits.min_yield
    return True


def candidate(spec: Spec, design: Design, result: Analysis, rank: int, score: int) -> Candidate:
    """One design as reported: parts, prediction, errors, spread, cost and warnings."""
    d = result.to_dict()
    parts = parts_report(design)
    warnings = warnings_for(design, spec)
    p = d["predicted"]
    return Candidate(
        rank=rank,
        parts=parts,
        predicted=Predicted(**p),
        error=ErrorOut(
            frequency_pct=100 * (p["frequency_hz"] / spec.target.target_hz - 1),
            amplitude_pct=100 * (p["amplitude_vpp"] / spec.triangle.amplitude_vpp - 1),
        ),
        worst_case=d["worst_case"],
        yield_fraction=d["yield_fraction"],
        yield_detail=d["yield"],
        sensitivity=d["sensitivity"],
        drift=d["drift"],
        cost=round(design.cost_per_board, 6),
        bom_lines=design.bom_lines,
        score=score,
        warnings=[
            WarningOut(code=w.code, severity=w.severity, message=w.message) for w in warnings
        ],
    )


def run_engine(model: SearchModel, engine: Engine, top: int, time_limit_s: float) -> EngineResult:
    if engine == "cpsat":
        return cpsat_top(model, top, time_limit_s)
    return enumerate_top(model, top, time_limit_s)


def design(
    spec: Spec,
    catalog: Catalog,
    *,
    engine: Engine = "cpsat",
    time_limit_s: float = DEFAULT_TIME_LIMIT_S,
    samples: int = 4000,
    seed: int = 0,
) -> DesignResult:
    """Best ``spec.ranking.top`` designs from ``catalog``, each checked by the full model.

    A spec with ``[trim]`` is searched by ``tristock.trim``, one with ``[tuning]`` by
    ``tristock.tuning``; both return the same result model.
    """
    if spec.trimmed:
        from tristock.trim import design_trimmed

        return design_trimmed(spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed)
    if spec.tuning is not None:
        from tristock.tuning import design_tuned

        return design_tuned(spec, catalog, time_limit_s=time_limit_s)
    t0 = time.perf_counter()
    model = build_model(spec, catalog)
    top = spec.ranking.top
    # The yield mode searches on an estimate; a wider shortlist lets the Monte Carlo re-rank.
    want = 3 * top if spec.ranking.by == "yield" else top
    kept: list[tuple[Design, Analysis, int]] = []
    analysed: dict[tuple[str, ...], Analysis] = {}  # a retry re-uses the re-checks done
    dropped = 0
    proven = True
    evaluated = 0
    while True:
        remaining = max(time_limit_s - (time.perf_counter() - t0), 0.0)
        found = run_engine(model, engine, want, remaining)
        evaluated += found.evaluated
        proven = found.proven_optimal
        kept, dropped = [], 0
        for n in range(len(found.rows)):
            if len(kept) >= top and spec.ranking.by != "yield":
                break
            d = design_of(model, found.rows, n)
            ids = tuple(p.id for p in d.parts().values())
            if ids not in analysed:
                analysed[ids] = analyse(d, spec, samples=samples, seed=seed)
            result = analysed[ids]
            if passes(spec, result):
                kept.append((d, result, int(found.rows.primary[n])))
            else:
                dropped += 1
        exhausted = len(found.rows) < want
        if len(kept) >= top or exhausted or time.perf_counter() - t0 > time_limit_s:
            if len(kept) < top and not exhausted:
                proven = False
            break
        want *= 2
    if spec.ranking.by == "yield":
        kept.sort(key=lambda k: (-round(k[1].yield_fraction, 4), k[2]))
    kept = kept[:top]
    candidates = [candidate(spec, d, r, i + 1, s) for i, (d, r, s) in enumerate(kept)]
    infeasible = None
    if not candidates:
        infeasible = Infeasible(reasons=infeasible_reasons(model, catalog, dropped))
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
        ),
        cautions=CAUTIONS,
    )


def search_space(model: SearchModel) -> int:
    """Combinations of eligible parts: |U1| x |R|³ x |C1|."""
    return len(model.opamps) * len(model.resistors) ** 3 * len(model.capacitors)


__all__ = ["CAUTIONS", "DEFAULT_TIME_LIMIT_S", "design"]
