"""Plain-words reasons why a spec has no answer in a catalog.

Each reason names the constraint that binds, with numbers: what the spec needs, what the
catalog offers, and the nearest it comes.
"""

from __future__ import annotations

import math
import time
from collections import Counter

from tristock.circuits.topology import Topology
from tristock.search.branches import branch_top
from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.model import OpAmpTerms, SearchModel, build_model
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.units import format_value

#: The largest timing share the model itself allows (``spec.LimitsSpec.max_timing_share``).
MODEL_TIMING_LIMIT = 0.4
#: The most time each search behind a reason may take (s).
REASON_SEARCH_S = 2.0
#: The reason given when the deadline stops the searches behind the reasons.
UNSETTLED = (
    "no combination meets the spec (the search proved it), but the time limit ran out "
    "before the constraint that binds was found: a longer time limit names it"
)


class _Searches:
    """Top-1 searches behind the reasons, each at most REASON_SEARCH_S and all within the
    deadline (None: no deadline). ``unsettled`` tells a search that found nothing because
    the time ran out, from which no reason may be drawn."""

    def __init__(self, deadline: float | None) -> None:
        self.deadline = deadline

    def first(self, model: SearchModel, *, coupled: bool) -> EngineResult:
        limit = REASON_SEARCH_S
        if self.deadline is not None:
            limit = min(limit, max(self.deadline - time.perf_counter(), 0.0))
        if len(model.form.integrator) == 2:  # the set-duty loop's rows: its own lister
            return branch_top(model, 1, limit, coupled=coupled)
        return enumerate_top(model, 1, limit, coupled=coupled)

    @staticmethod
    def unsettled(found: EngineResult) -> bool:
        return len(found.rows) == 0 and not found.proven_optimal


def _series_text(model: SearchModel) -> str:
    names = model.spec.limits.resistor_series
    return "/".join(names) if names else "any series"


def _timing_reason(
    spec: Spec, catalog: Catalog, searches: _Searches, topology: Topology
) -> str | None:
    """The reason when only the timing-share limit stands in the way: designs meet the bands
    once op-amp timing may set up to 40 % of the period (the model's own limit)."""
    lim = spec.limits
    if lim.max_timing_share >= MODEL_TIMING_LIMIT:
        return None
    loose = spec.model_copy(
        update={"limits": lim.model_copy(update={"max_timing_share": MODEL_TIMING_LIMIT})}
    )
    found = searches.first(build_model(loose, catalog, topology), coupled=False)
    if len(found.rows) == 0:
        return None
    return (
        "designs meet the bands only where op-amp delay, slew and GBW set more than "
        f"{lim.max_timing_share:.0%} of the period (limits.max_timing_share; the best-ranked "
        f"sets {float(found.rows.share[0]):.0%}): such a frequency follows part-to-part timing "
        "spread; choose a faster op amp, a lower frequency or a larger limit (at most 0.4)"
    )


def _divider_cuts(model: SearchModel) -> list[str]:
    """The stages whose k window a condition of the form's acceptance emptied or cut
    (``SearchForm.divider_limit``: a comparator's input common-mode range), each in its
    words with the k the amplitude band alone would allow."""
    found = [
        f"{e.designator} {e.part_id or ''}: {e.reason}, below the k its amplitude band "
        "needs".replace(" :", ":")
        for e in model.divider_cuts
    ]
    found += [
        f"{o.k_cut.designator} {o.k_cut.part_id or ''}: {o.k_cut.reason}, where the amplitude "
        f"band alone allows k up to {_amplitude_k_max(model, o):.4g}".replace(" :", ":")
        for o in model.opamps
        if o.k_cut is not None
    ]
    return list(dict.fromkeys(found))


def _amplitude_k_max(model: SearchModel, o: OpAmpTerms) -> float:
    """The k window's upper end from the amplitude band alone: A_max over the span's low
    end (``search.model``)."""
    spec = model.spec
    return (
        spec.triangle.amplitude_vpp
        * (1 + spec.triangle.tolerance_pct / 100)
        / float(o.loop.span_lo)
    )


def infeasible_reasons(
    model: SearchModel, catalog: Catalog, dropped: int = 0, *, deadline: float | None = None
) -> list[str]:
    """Why ``model`` has no candidate, most basic cause first. The searches behind the
    reasons stop at ``deadline`` (``time.perf_counter()``; None: none); a reason they could
    not settle in time is not given (``UNSETTLED`` says so instead)."""
    searches = _Searches(deadline)
    spec = model.spec
    lim = spec.limits
    boards = spec.build.boards
    reasons: list[str] = []
    r_lo = format_value(lim.resistance_min_ohm, "Ω")
    r_hi = format_value(lim.resistance_max_ohm, "Ω")

    stage = model.form.stage_designators
    if not model.opamps:
        for e in model.exclusions:
            if e.designator in stage:
                what = "op amp" if e.designator == "U1" else e.designator
                reasons.append(f"{what} {e.part_id or ''}: {e.reason}".replace(" :", ":"))
        if lim.opamps is not None:
            missing = [i for i in lim.opamps if i not in {o.id for o in catalog.opamps}]
            if missing:
                reasons.append(f"limits.opamps names ids not in the catalog: {', '.join(missing)}")
        if stage == ("U1",):
            reasons.insert(0, "no op amp in the catalog can be used:")
        else:
            reasons.insert(
                0, f"no Schmitt stage ({', '.join(stage)}) can be built from the catalog:"
            )
        return reasons
    if len(model.resistors) == 0:
        return [
            f"no resistor in {_series_text(model)} between {r_lo} and {r_hi} "
            f"with stock for {boards} boards"
        ]
    if len(model.capacitors) == 0:
        short = Counter(e.reason.split(" ")[0] for e in model.exclusions if e.designator == "C1")
        return [
            f"no {'/'.join(lim.dielectrics)} capacitor in stock x {boards} boards "
            f"with a voltage rating above the triangle peak"
            + (f" ({sum(short.values())} excluded by stock or rating)" if short else "")
        ]

    ln_r = model.resistors.ln_value
    aa, ab = model.band_a
    any_pair = False
    ratios = ln_r[:, None] - ln_r[None, :]
    for o in model.opamps:
        if o.target is None:
            lo, hi = (math.log(x) for x in o.k_range)
            any_pair |= bool(((ratios >= lo) & (ratios <= hi)).any())
            if model.topology.name == "opamp_schmitt":
                reasons.append(f"op amp {o.part.id}: {o.target_note}")
            continue
        ln_kt = o.target.ln_k_target
        ok = (ratios - ln_kt >= aa) & (ratios - ln_kt <= ab)
        if ok.any():
            any_pair = True
            continue
        nearest = float(math.exp(ratios.flat[abs(ratios - ln_kt).argmin()]))
        reasons.append(
            f"{spec.triangle.amplitude_vpp:g} Vpp needs k = R1/R2 = {math.exp(ln_kt):.4g} with "
            f"the +{o.vh:.2f}/-{o.vl:.2f} V swing of {o.part.id}; no R1/R2 pair in "
            f"{_series_text(model)} within ±{spec.triangle.tolerance_pct:g} % "
            f"(nearest {nearest:.4g})"
        )
    if not any_pair:
        return reasons

    nominal = spec.model_copy(update={"limits": lim.model_copy(update={"guarantee": "nominal"})})
    topology = model.topology
    relaxed = searches.first(build_model(nominal, catalog, topology), coupled=False)
    if searches.unsettled(relaxed):
        return [UNSETTLED]
    if len(relaxed.rows) == 0:
        timing = _timing_reason(nominal, catalog, searches, topology)
        if timing:
            return [timing]
        return [
            *_divider_cuts(model),
            f"no R3·C1 product from {_series_text(model)} resistors ({r_lo}..{r_hi}) and "
            f"{'/'.join(lim.dielectrics)} capacitors puts the frequency within "
            f"±{spec.target.tolerance_pct:g} % of {format_value(spec.target.target_hz, 'Hz')}"
            " with any usable op amp and R1/R2 pair",
        ]
    if lim.guarantee != "nominal":
        strict = searches.first(model, coupled=False)
        if searches.unsettled(strict):
            return [UNSETTLED]
        if len(strict.rows) == 0:
            what = (
                "at every corner of tolerance, rails and temperature"
                if lim.guarantee == "worst_case"
                else f"with an estimated yield of at least {lim.min_yield:.1%}"
            )
            return [
                f"combinations meet the nominal bands, but none holds them {what}; "
                "widen the bands, choose tighter parts or relax limits.guarantee"
            ]
    coupled = searches.first(model, coupled=True)
    if searches.unsettled(coupled):
        return [UNSETTLED]
    if len(coupled.rows) == 0:
        by_cost = nominal.model_copy(
            update={"ranking": nominal.ranking.model_copy(update={"by": "cost"})}
        )
        cheapest_row = searches.first(build_model(by_cost, catalog, topology), coupled=False)
        cheapest = float(cheapest_row.rows.cost.min()) if len(cheapest_row.rows) else math.nan
        out = []
        if lim.max_cost is not None:
            out.append(
                f"combinations meet the bands, but max_cost {lim.max_cost:g} per board or "
                f"stock for {boards} boards rules them all out (the cheapest that meets the "
                f"bands costs {cheapest:.4g})"
            )
        else:
            out.append(
                f"combinations meet the bands, but stock for {boards} boards rules them out "
                "(a part used in two positions needs twice the pieces)"
            )
        return out
    if dropped:
        return [
            f"the search found {dropped} combination(s), but the full circuit model "
            "(offset, bias current, GBW) puts each outside the spec"
        ]
    return ["no combination meets the spec within the time limit"]
