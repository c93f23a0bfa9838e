"""Re-optimise a trimmed design when stock changes: the fewest changed designators.

The same proof as for fixed designs (``tristock.designs.reoptimise``), over the six designators
U1, R1, R2, R3, C1 and RV1: parts named unavailable, parts no longer in the catalog and parts
whose stock cannot cover the boards in the positions they fill must change. For
n = 0, 1, ..., 6 every set S of n designators that holds those is searched exactly by the
trimmed search (``trim.walk``), the positions outside S pinned to their current part and the
positions in S forced to another; the sets of one n are walked together in one rank order,
so the first n with an answer that passes the full model is the minimum (every smaller n was
searched to its end and had none). Among the answers with n changes the order is the trimmed
ranking (resolution, drift, cost), then keeping U1, then keeping C1, then stock codes. A time
limit that cuts the walk says ``proven_optimal: false`` and never reports infeasibility.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Sequence
from itertools import combinations

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.board import rails_from_supply, resolve
from tristock.designs.changes import (
    blocked_positions,
    changes_of,
    check_withdrawn,
    without_parts,
)
from tristock.designs.results import (
    Infeasible,
    OriginalDesign,
    Predicted,
    ReoptimisedCandidate,
    ReoptimiseResult,
    SearchInfo,
)
from tristock.designs.trimmed.answers import ENGINE, search_space, trimmed_candidate
from tristock.designs.trimmed.checks import nominal_wiper
from tristock.designs.trimmed.context import TRIM_DESIGNATORS, TrimContext, trim_context
from tristock.designs.trimmed.explain import trimmed_reasons
from tristock.designs.trimmed.walk import Accepted, TrimSearch, WalkResult, walk
from tristock.search.model import SCORE_RESOLUTION
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def _pinned(ctx: TrimContext, current: dict[str, str]) -> dict[str, int | None]:
    """Each designator's current part as an index into the context's tables (None when it is
    not eligible there: excluded by the spec's limits or by stock)."""
    model = ctx.model
    tables: dict[str, list[str]] = {
        "U1": [o.part.id for o in model.opamps],
        "R1": [p.id for p in model.resistors.parts],
        "C1": [p.id for p in model.capacitors.parts],
        "RV1": [p.id for p in ctx.pots.parts],
    }
    tables["R2"] = tables["R3"] = tables["R1"]
    return {d: tables[d].index(current[d]) if current[d] in tables[d] else None for d in tables}


def _masks(
    ctx: TrimContext, changed: tuple[str, ...], pinned: dict[str, int | None]
) -> dict[str, NDArray[np.bool_]]:
    """Positions outside ``changed`` keep their part; positions in it must take another."""
    model = ctx.model
    sizes = {
        "U1": len(model.opamps),
        "R1": len(model.resistors),
        "R2": len(model.resistors),
        "R3": len(model.resistors),
        "C1": len(model.capacitors),
        "RV1": len(ctx.pots),
    }
    masks = {}
    for d in TRIM_DESIGNATORS:
        mask = np.zeros(sizes[d], dtype=bool)
        at = pinned[d]
        if d in changed:
            mask[:] = True
            if at is not None:
                mask[at] = False
        elif at is not None:
            mask[at] = True
        masks[d] = mask
    return masks


def _original(
    spec: Spec, catalog: Catalog, current: dict[str, str]
) -> tuple[Predicted | None, list[str]]:
    """The current design's nominal prediction at its trimmed wiper, and what keeps it from
    the spec before any search (the trimmer cannot reach the target inside the margins)."""
    if not all(pid in catalog for pid in current.values()):
        return None, []
    try:
        design = resolve(current, catalog)
    except SpecError:
        return None, []
    assert spec.trim is not None
    alpha = nominal_wiper(design, spec)
    rails = rails_from_supply(spec.supply)
    if alpha is None:
        ends = [
            float(dataclasses.replace(design, wiper=w).oscillator(rails).frequency_hz)
            for w in (1.0, 0.0)
        ]
        return None, [
            f"the trimmer's travel ({ends[0]:.5g}..{ends[1]:.5g} Hz) does not reach "
            f"{spec.target.target_hz:g} Hz"
        ]
    p = dataclasses.replace(design, wiper=alpha).oscillator(rails).prediction()
    predicted = Predicted(
        frequency_hz=float(p.frequency_hz),
        amplitude_vpp=float(p.amplitude_vpp),
        duty_high=float(p.duty_high),
        offset_v=float(p.offset_v),
        square_high_v=float(p.square_high_v),
        square_low_v=float(p.square_low_v),
        timing_share=float(p.timing_share),
    )
    m = spec.trim.margin_pct
    if not m / 100 <= alpha <= 1 - m / 100:
        return predicted, [
            f"the nominal board reaches {spec.target.target_hz:g} Hz at {100 * alpha:.1f} % of "
            f"travel, outside {m:g}..{100 - m:g} %"
        ]
    return predicted, []


def reoptimise_trimmed(
    spec: Spec,
    catalog: Catalog,
    current: dict[str, str],
    *,
    without: Sequence[str] = (),
    time_limit_s: float = 5.0,
    samples: int = 4000,
) -> ReoptimiseResult:
    """Trimmed designs meeting ``spec`` that change the fewest designators of ``current``
    (module docstring). ``spec`` carries the build's boards and the ranking's top."""
    from tristock.designs.shortfall import shortfall

    assert spec.trim is not None
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    missing = [d for d in TRIM_DESIGNATORS if d not in current]
    extra = [d for d in current if d not in TRIM_DESIGNATORS]
    if missing or extra:
        raise SpecError(
            [f"parts.{d}: missing (a trimmed design has U1, R1, R2, R3, C1, RV1)" for d in missing]
            + [f"parts.{d}: not part of a trimmed design" for d in extra]
        )
    check_withdrawn(catalog, without)
    boards = spec.build.boards
    short = {s.id: s for s in shortfall(catalog, current, boards)}
    blocked, shared = blocked_positions(
        catalog, current, without, short, boards, TRIM_DESIGNATORS, TRIM_DESIGNATORS
    )
    predicted, first_reasons = _original(spec, catalog, current)

    reduced = without_parts(catalog, without)
    ctx = trim_context(spec, reduced)
    pinned = _pinned(ctx, current)
    must_change = {d for d in TRIM_DESIGNATORS if d in blocked or pinned[d] is None}
    outside = {d for d in must_change if d not in blocked}

    evaluated = dropped = first_dropped = 0
    kept: list[ReoptimisedCandidate] = []
    walked = WalkResult()
    first: list[TrimSearch] = []  # n = 0: the current design alone
    every: list[TrimSearch] = []  # all sets searched: together, the whole space
    for n in range(len(TRIM_DESIGNATORS) + 1):
        sets = [c for c in combinations(TRIM_DESIGNATORS, n) if must_change <= set(c)]
        searches = []
        for changed in sets:
            model = dataclasses.replace(ctx.model, allowed=_masks(ctx, changed, pinned))
            searches.append(TrimSearch(dataclasses.replace(ctx, model=model), deadline))
            if time.perf_counter() > deadline:
                break  # the walk below sees an incomplete set of searches as cut
        if len(searches) < len(sets):
            walked = WalkResult(proven=False, cut=True)
            break
        walked = walk(
            searches,
            spec.ranking.top,
            deadline,
            tiebreak=lambda si, sets=sets: ("U1" in sets[si], "C1" in sets[si]),  # type: ignore[misc]
        )
        evaluated += sum(s.stats.evaluated for s in searches)
        dropped += walked.dropped
        every += searches
        if n == 0:
            first, first_dropped = searches, walked.dropped
        for found in walked.accepted:
            changed = sets[found.search]
            kept.append(_answer(searches[found.search].ctx, found, changed, current, blocked,
                                outside, len(kept) + 1, samples))  # fmt: skip
        if kept or not walked.proven:
            break

    reasons = list(dict.fromkeys([*blocked.values(), *shared.values(), *first_reasons]))
    reasons += [f"{current[d]} is outside the spec's limits or stock" for d in sorted(outside)]
    original_passes = bool(kept) and not kept[0].changed
    if not original_passes and not reasons and first:
        reasons += trimmed_reasons(first, reduced, first_dropped)
    infeasible = None
    if not kept and walked.proven:
        infeasible = Infeasible(reasons=trimmed_reasons(every, reduced, dropped))
    return ReoptimiseResult(
        spec=spec,
        original=OriginalDesign(
            parts=dict(current), passes=original_passes, reasons=reasons, predicted=predicted
        ),
        candidates=kept,
        infeasible=infeasible,
        shortfall=list(short.values()),
        search=SearchInfo(
            engine=ENGINE,
            proven_optimal=walked.proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=search_space(ctx),
            evaluated=evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=dropped,
            time_limit_s=time_limit_s,
        ),
    )


def _answer(
    ctx: TrimContext,
    found: Accepted,
    changed: tuple[str, ...],
    current: dict[str, str],
    blocked: dict[str, str],
    outside: set[str],
    rank: int,
    samples: int,
) -> ReoptimisedCandidate:
    """One answer with what changed and why."""
    base = trimmed_candidate(ctx, found, rank, samples=samples, seed=0)
    names = [x for x in TRIM_DESIGNATORS if x in changed]
    new_ids = {k: v.id for k, v in base.parts.items()}
    changes = changes_of(names, current, new_ids, blocked, outside)
    return ReoptimisedCandidate(**base.model_dump(), changed=names, changes=changes)
