"""Re-optimise a released design when stock changes: the fewest changed designators.

Parts named as unavailable, parts whose stock no longer covers boards x uses, and parts the
spec's limits now exclude cannot stay. For n = 0, 1, ..., 5 changed designators, every set S of
n designators is searched exactly with the positions outside S pinned to their current part and
the positions in S forced to a different part. The first n with an answer that passes the full
model is the minimum (a proof: every smaller n was searched completely and had none). Among the
answers with n changes the order is the spec's ranking; exact ties keep the op amp, then the
capacitor (a design that keeps U1 ranks first, then one that keeps C1), then stock codes.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from itertools import combinations
from typing import Any

import numpy as np

from tristock.analysis.bundle import analyse
from tristock.circuits.board import DESIGNATORS, resolve
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.designs.candidate import candidate, passes
from tristock.designs.changes import (
    blocked_positions,
    changes_of,
    check_withdrawn,
    with_build,
    without_parts,
)
from tristock.designs.fixed import design_of, search_space
from tristock.designs.results import (
    Infeasible,
    OriginalDesign,
    Predicted,
    ReoptimisedCandidate,
    ReoptimiseResult,
    SearchInfo,
)
from tristock.designs.shortfall import shortfall
from tristock.search.enumeration import enumerate_top
from tristock.search.explain import infeasible_reasons
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.rows import Rows, rank_key
from tristock.spec.limits import default_time_limit_s
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

_POSITION_TABLE = {
    "U1": "opamps",
    "R1": "resistors",
    "R2": "resistors",
    "R3": "resistors",
    "C1": "capacitors",
}


def _index_of(model: SearchModel, designator: str, part_id: str) -> int | None:
    if designator == "U1":
        return next((o.index for o in model.opamps if o.part.id == part_id), None)
    table = getattr(model, _POSITION_TABLE[designator])
    return next((n for n, p in enumerate(table.parts) if p.id == part_id), None)


def _size(model: SearchModel, designator: str) -> int:
    if designator == "U1":
        return len(model.opamps)
    return len(getattr(model, _POSITION_TABLE[designator]))


def reoptimise(
    spec: Spec,
    catalog: Catalog,
    current: dict[str, str],
    *,
    without: Sequence[str] = (),
    boards: int | None = None,
    top: int | None = None,
    time_limit_s: float | None = None,
    samples: int = 4000,
) -> ReoptimiseResult:
    """Designs meeting ``spec`` that change the fewest designators of ``current``.
    ``time_limit_s``: None takes the default of the spec's job (``spec.limits``)."""
    if time_limit_s is None:
        time_limit_s = default_time_limit_s(spec.tuning is not None)
    if spec.tuning is not None:
        from tristock.designs.tuned import reoptimise_tuned

        return reoptimise_tuned(
            spec, catalog, current, without=without, boards=boards, top=top,
            time_limit_s=time_limit_s, samples=samples,
        )  # fmt: skip
    t0 = time.perf_counter()
    spec = with_build(spec, boards, top)
    if spec.circuit.topology_name != "opamp_schmitt" or set(current) - set(
        OPAMP_SCHMITT.designators
    ):
        raise SpecError(
            [
                "circuit: re-optimisation is built for the op-amp Schmitt loop only; search "
                "the variant again with the part withdrawn (limits or stock)"
            ]
        )
    if spec.trimmed:
        from tristock.designs.trimmed.reoptimise import reoptimise_trimmed

        return reoptimise_trimmed(
            spec, catalog, current, without=without, time_limit_s=time_limit_s, samples=samples
        )
    missing = [d for d in DESIGNATORS if d not in current]
    if missing:
        raise SpecError([f"parts.{d}: missing" for d in missing])
    check_withdrawn(catalog, without)
    n_boards = spec.build.boards

    short = {s.id: s for s in shortfall(catalog, current, n_boards)}
    # Short only because the code fills several positions: one position may keep it, and the
    # search's shared-stock constraint decides which (so these positions are not forced).
    blocked, shared = blocked_positions(
        catalog, current, without, short, n_boards, list(current), DESIGNATORS
    )

    reasons = list(dict.fromkeys([*blocked.values(), *shared.values()]))
    predicted = None
    before: dict[str, Any] = {}  # the original's yield and worst case, when analysed
    full_model_passes = False
    if all(pid in catalog for pid in current.values()):
        original = resolve(current, catalog)
        try:
            result = analyse(original, spec, samples=samples)
        except ValueError as err:  # it cannot even be built on these rails
            reasons.append(f"the full model cannot analyse it: {err}")
        else:
            figures = result.to_dict()
            p = figures["predicted"]
            predicted = Predicted(**p)
            before = {k: figures[k] for k in ("yield_fraction", "worst_case")}
            if passes(spec, original, result):
                full_model_passes = True
            else:
                reasons.append(
                    f"the full model puts it outside the spec ({p['frequency_hz']:.5g} Hz, "
                    f"{p['amplitude_vpp']:.4g} Vpp, guarantee {spec.limits.guarantee})"
                )

    reduced = without_parts(catalog, without)
    model = build_model(spec, reduced)
    pinned = {d: _index_of(model, d, current[d]) for d in DESIGNATORS}
    must_change = {d for d in DESIGNATORS if d in blocked or pinned[d] is None}
    outside = {d for d in must_change if d not in blocked}

    proven = True
    evaluated = 0
    kept: list[ReoptimisedCandidate] = []
    for n in range(len(DESIGNATORS) + 1):
        want = spec.ranking.top * 2 + 5
        while True:
            batches: list[tuple[frozenset[str], Rows]] = []
            capped = False
            for changed in combinations(DESIGNATORS, n):
                if not must_change <= set(changed):
                    continue
                model.allowed = _masks(model, changed, pinned)
                remaining = max(time_limit_s - (time.perf_counter() - t0), 0.0)
                found = enumerate_top(model, want, remaining)
                proven &= found.proven_optimal
                evaluated += found.evaluated
                capped |= len(found.rows) >= want
                if len(found.rows):
                    batches.append((frozenset(changed), found.rows))
            model.allowed = {}
            kept, consumed = _finish(
                spec, model, batches, current, {**shared, **blocked}, outside, samples
            )
            # A capped set's unseen rows rank after its want-th row; they can matter only if
            # the full model dropped so many rows that the merge went that deep.
            thin = len(kept) < spec.ranking.top or consumed > want
            if not (capped and thin) or time.perf_counter() - t0 > time_limit_s:
                if capped and thin:
                    proven = False
                break
            want *= 4
        if kept or time.perf_counter() - t0 > time_limit_s:
            break

    # The original passes when it is itself the 0-change answer: the full model alone does not
    # see the spec's limits, the cost cap or the stock.
    original_passes = bool(kept) and not kept[0].changed
    if full_model_passes and not original_passes and not blocked and not shared:
        reasons += [f"{current[d]} is outside the spec's limits or stock" for d in sorted(outside)]
        if not outside:
            reasons.append(
                "the search model rejects this combination (cost cap, capacitor voltage, or "
                "its tolerance estimate under the spec's guarantee)"
            )

    infeasible = None
    if not kept:
        infeasible = Infeasible(reasons=infeasible_reasons(model, reduced))
    return ReoptimiseResult(
        spec=spec,
        original=OriginalDesign(
            parts=dict(current),
            passes=original_passes,
            reasons=reasons,
            predicted=predicted,
            **before,
        ),
        candidates=kept,
        infeasible=infeasible,
        shortfall=list(short.values()),
        search=SearchInfo(
            engine="enumerate",
            proven_optimal=proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=search_space(model),
            evaluated=evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=0,
            time_limit_s=time_limit_s,
        ),
    )


def _masks(
    model: SearchModel, changed: tuple[str, ...], pinned: dict[str, int | None]
) -> dict[str, np.ndarray]:
    """Positions outside ``changed`` keep their part; positions in it must take another."""
    masks = {}
    for d in DESIGNATORS:
        mask = np.zeros(_size(model, d), dtype=bool)
        if d in changed:
            mask[:] = True
            if pinned[d] is not None:
                mask[pinned[d]] = False
        else:
            mask[pinned[d]] = True
        masks[d] = mask
    return masks


def _finish(
    spec: Spec,
    model: SearchModel,
    batches: list[tuple[frozenset[str], Rows]],
    current: dict[str, str],
    blocked: dict[str, str],
    outside: set[str],
    samples: int,
) -> tuple[list[ReoptimisedCandidate], int]:
    """Merge the batches of one change count in rank order; keep those the full model passes.
    Also returns how many merged rows were consumed (kept or dropped)."""
    ranked = []
    for changed, rows in batches:
        for n in range(len(rows)):
            key = rank_key(model, rows, n)
            ranked.append(
                ((key[0], key[1], "U1" in changed, "C1" in changed, *key[2:]), changed, rows, n)
            )
    ranked.sort(key=lambda item: item[0])
    out: list[ReoptimisedCandidate] = []
    consumed = 0
    for _, changed, rows, n in ranked:
        if len(out) >= spec.ranking.top:
            break
        consumed += 1
        d = design_of(model, rows, n)
        result = analyse(d, spec, samples=samples)
        if not passes(spec, d, result):
            continue
        base = candidate(spec, d, result, len(out) + 1, int(rows.primary[n]))
        names = [x for x in ("U1", "R1", "R2", "R3", "C1") if x in changed]
        new_ids = {k: v.id for k, v in base.parts.items()}
        changes = changes_of(names, current, new_ids, blocked, outside)
        out.append(ReoptimisedCandidate(**base.model_dump(), changed=names, changes=changes))
    return out, consumed
