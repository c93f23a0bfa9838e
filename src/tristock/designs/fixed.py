"""The design search: best parts from a catalog for a spec, each answer re-checked in full.

``design(spec, catalog)`` builds the search model (``model``), runs one engine (``cpsat``, the
default, or ``enumerate``), then re-evaluates every answer with the full circuit model and the
tolerance analysis; an answer the full model rejects is dropped and the search asks for more.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from tristock.analysis.bundle import (
    Analysis,
    WorstCase,
    YieldResult,
    analyse,
    worst_case,
    yield_count,
)
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.oscillator import OpAmpModel, square_levels
from tristock.designs.results import (
    Candidate,
    DesignResult,
    ErrorOut,
    Infeasible,
    PartOut,
    Predicted,
    SearchInfo,
    WarningOut,
)
from tristock.report.board import parts_report, warnings_for
from tristock.search.cpsat import cpsat_top
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.explain import infeasible_reasons
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.rows import RowPrediction, Rows
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.stock.units import format_value

Engine = Literal["cpsat", "enumerate"]
#: For one design the enumeration's rows come in exact rank order with every constraint
#: applied, so CP-SAT (kept as an independent cross-check, and for problems that couple
#: several designs) only re-derives them, more slowly.
DEFAULT_ENGINE: Engine = "enumerate"
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


def accepts(spec: Spec, design: Design) -> bool:
    """The search's acceptance of one fixed design at nominal values (``search.rows``): the
    bands, the model's ground (peaks inside the integrator's swing, its slew above the
    triangle's slope, the timing share within the limit) and C1's voltage rating."""
    model = OpAmpModel.from_part(design.u1)
    try:
        vh, vl = square_levels(rails_from_supply(spec.supply), model)
    except ValueError:
        return False

    def one(x: float) -> NDArray[np.float64]:
        return np.array([x], dtype=np.float64)

    values = (
        one(design.r1.value),
        one(design.r2.value),
        one(design.r3.value),
        one(design.c1.value),
    )
    rp = RowPrediction([model], np.zeros(1, dtype=np.int64), values, one(vh), one(vl))
    return bool(rp.accepted(spec, one(design.c1.voltage_v))[0])


def passes(spec: Spec, design: Design, result: Analysis) -> bool:
    """The full model's verdict: ``accepts`` and the spec's guarantee, from the analysis
    (worst case over the whole spread box, or the Monte Carlo yield)."""
    if not accepts(spec, design):
        return False
    return _guarantee_holds(spec, result.worst_case, result.yield_result)


def _guarantee_holds(spec: Spec, wc: WorstCase | None, y: YieldResult | None) -> bool:
    (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
    f0, a0 = spec.target.target_hz, spec.triangle.amplitude_vpp

    def inside(f: float, a: float) -> bool:
        return fa <= math.log(f / f0) <= fb and aa <= math.log(a / a0) <= ab

    if spec.limits.guarantee == "worst_case":
        assert wc is not None
        return inside(wc.frequency_hz[0], wc.amplitude_vpp[0]) and inside(
            wc.frequency_hz[1], wc.amplitude_vpp[1]
        )
    if spec.limits.guarantee == "yield":
        assert y is not None
        return y.fraction >= spec.limits.min_yield
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


@dataclass
class _Verdict:
    """The full model's re-check of one row: whether it meets the guarantee and, when the
    ranking needs it, its Monte Carlo pass count (an upper bound when ``exact`` is False:
    the count stopped once the row could no longer matter)."""

    ok: bool
    passed: int | None
    exact: bool = True


def _recheck(spec: Spec, design: Design, samples: int, seed: int, beat: int) -> _Verdict:
    """What the guarantee and the ranking need beyond the search's own acceptance. In the
    yield ranking a row must pass more than ``beat`` samples to enter the top; counting
    stops as soon as it cannot (``analysis.yield_count``)."""
    limits = spec.limits
    if limits.guarantee == "worst_case":
        wc = worst_case(design, spec)
        if not _guarantee_holds(spec, wc, None):
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
) -> tuple[list[tuple[Design, int, int | None]], int, bool, bool]:
    """Re-check rows in rank order until the top is settled.

    Returns the rows that pass (design, score, yield count), how many were dropped, whether
    the top is settled (no unchecked row can rank above the ``top``-th kept one) and whether
    the deadline cut the walk. In the yield ranking the key is (-yield, search order): a row
    never checked can at best tie at yield 1, after every checked row, so the top is settled
    once ``top`` kept rows have every sample passing; a row whose count cannot beat the
    ``top``-th kept one is not counted to the end.
    """
    top = spec.ranking.top
    by_yield = spec.ranking.by == "yield"
    kept: list[tuple[Design, int, int | None]] = []
    dropped = 0

    def settled() -> bool:
        if not by_yield:
            return len(kept) >= top
        return sum(p == samples for _, _, p in kept) >= top

    for n in range(len(rows)):
        if settled():
            return kept, dropped, True, False
        if time.perf_counter() > deadline and n:
            return kept, dropped, False, True
        d = design_of(model, rows, n)
        ids = tuple(p.id for p in d.parts().values())
        counts = sorted((p or 0 for _, _, p in kept), reverse=True)
        beat = counts[top - 1] if by_yield and len(counts) >= top else -1
        if ids not in verdicts or (not verdicts[ids].exact and (verdicts[ids].passed or 0) > beat):
            verdicts[ids] = _recheck(spec, d, samples, seed, beat)
        v = verdicts[ids]
        if not v.ok:
            dropped += 1
        elif v.exact:
            kept.append((d, int(rows.primary[n]), v.passed))
    return kept, dropped, settled(), False


def design(
    spec: Spec,
    catalog: Catalog,
    *,
    engine: Engine = DEFAULT_ENGINE,
    time_limit_s: float = DEFAULT_TIME_LIMIT_S,
    samples: int = 4000,
    seed: int = 0,
) -> DesignResult:
    """Best ``spec.ranking.top`` designs from ``catalog``, optimal under the full model.

    The engines list rows in rank order, each scored by the full model at nominal values;
    the guarantee (worst case over the spread box, Monte Carlo yield) and the yield ranking
    are then decided by the analysis, row by row in that order, until no unchecked row can
    enter the top (``_walk``). A spec with ``[trim]`` is searched by ``tristock.trim``, one
    with ``[tuning]`` by ``tristock.tuning``; both return the same result model.
    """
    if spec.trimmed:
        from tristock.designs.trimmed import design_trimmed

        return design_trimmed(spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed)
    if spec.tuning is not None:
        from tristock.designs.tuned import design_tuned

        return design_tuned(spec, catalog, time_limit_s=time_limit_s, samples=samples, seed=seed)
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    model = build_model(spec, catalog)
    top = spec.ranking.top
    want = top
    verdicts: dict[tuple[str, ...], _Verdict] = {}  # a retry re-uses the re-checks done
    evaluated = 0
    while True:
        remaining = max(deadline - time.perf_counter(), 0.0)
        found = run_engine(model, engine, want, remaining)
        evaluated += found.evaluated
        kept, dropped, settled, cut = _walk(
            spec, model, found.rows, verdicts, samples, seed, deadline
        )
        exhausted = len(found.rows) < want
        if settled or exhausted or cut or time.perf_counter() > deadline:
            proven = found.proven_optimal and (settled or exhausted) and not cut
            break
        want *= 4
    if spec.ranking.by == "yield":
        kept.sort(key=lambda k: -(k[2] or 0))  # stable: search order within a yield
    kept = kept[:top]
    candidates = [
        candidate(spec, d, analyse(d, spec, samples=samples, seed=seed), i + 1, score)
        for i, (d, score, _) in enumerate(kept)
    ]
    infeasible = None
    if not candidates and proven:
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


__all__ = ["CAUTIONS", "DEFAULT_ENGINE", "DEFAULT_TIME_LIMIT_S", "design"]
