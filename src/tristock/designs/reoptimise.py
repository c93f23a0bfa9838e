"""Re-optimise a released design when stock changes: the fewest changed designators.

Parts named as unavailable, parts whose stock no longer covers boards x uses, and parts the
spec's limits now exclude cannot stay. The positions are the designators the circuit's search
form fills (``designs.positions``: U1, R1, R2, R3, C1, and the variants' own: U2, R5, D1,
D2; R3A, R3B, D3, D4 of the set duty). For n = 0, 1, ... changed positions, every set S of n
positions is searched exactly with the positions outside S pinned to their current part and
the positions in S forced to a different part (or to a part where there was none, or to
none). The first n with an answer
that passes the full model is the minimum (a proof: every smaller n was searched completely
and had none). Among the answers with n changes the order is the spec's ranking; exact ties
keep the stage (a design that changes fewer of U1 and the stage's parts ranks first), then the
capacitor, then stock codes. A circuit without a search form is refused.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from itertools import combinations
from typing import Any

from tristock.analysis.bundle import Analysis, analyse
from tristock.analysis.worstcase import worst_case
from tristock.circuits.board import AnyBoard
from tristock.circuits.checks import Warning
from tristock.designs.candidate import accepts, candidate, guarantee_holds, passes, warnings_for
from tristock.designs.changes import (
    blocked_positions,
    changes_of,
    check_withdrawn,
    with_build,
    without_parts,
)
from tristock.designs.fixed import design_of, run_engine, search_space
from tristock.designs.positions import (
    Positions,
    positions_of,
    reoptimisable,
    resolve_current,
)
from tristock.designs.results import (
    Infeasible,
    OriginalDesign,
    Predicted,
    ReoptimisedCandidate,
    ReoptimiseResult,
    SearchInfo,
)
from tristock.designs.shortfall import shortfall
from tristock.search.branchrows import BranchRows
from tristock.search.branchrows import rank_key as branch_rank_key
from tristock.search.explain import infeasible_reasons
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.rows import Rows, rank_key
from tristock.spec.limits import default_time_limit_s
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


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
    topology: str | None = None,
) -> ReoptimiseResult:
    """Designs meeting ``spec`` that change the fewest designators of ``current``.
    ``time_limit_s``: None takes the default of the spec's job (``spec.limits``);
    ``topology``: the board's circuit by name (a DESIGN file's ``topology``; None: the spec's
    ``[circuit]``, or with ``topology = "any"`` the circuit whose designators the board has,
    ``designs.positions.board_topology``)."""
    circuit = reoptimisable(spec, current, topology)
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
    if spec.trimmed:
        from tristock.designs.trimmed.reoptimise import reoptimise_trimmed

        return reoptimise_trimmed(
            spec, catalog, current, without=without, time_limit_s=time_limit_s, samples=samples
        )
    positions = positions_of(circuit)
    check_withdrawn(catalog, without)
    n_boards = spec.build.boards

    short = {s.id: s for s in shortfall(catalog, current, n_boards)}
    # Short only because the code fills several positions: one position may keep it, and the
    # search's shared-stock constraint decides which (so these positions are not forced).
    blocked, shared = blocked_positions(
        catalog, current, without, short, n_boards, list(current), list(current)
    )

    reasons = list(dict.fromkeys([*blocked.values(), *shared.values()]))
    predicted = None
    before: dict[str, Any] = {}  # the original's yield and worst case, when analysed
    full_model_passes = False
    if all(pid in catalog for pid in current.values()):
        original = resolve_current(circuit, current, catalog)
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
    model = build_model(spec, reduced, circuit, deadline=t0 + time_limit_s)  # cut: not searched
    must_change = set(positions.names) - positions.keepable(model, current)
    must_change |= set(blocked)
    outside = {d for d in must_change if d not in blocked}

    proven = True
    evaluated = 0
    kept: list[ReoptimisedCandidate] = []
    verdicts: dict[tuple[str, ...], tuple[Analysis, list[Warning]] | None] = {}
    deadline = t0 + time_limit_s
    for n in range(len(positions.names) + 1):
        want = spec.ranking.top * 2 + 5
        while True:
            batches: list[tuple[frozenset[str], Rows]] = []
            capped = False
            for changed in combinations(positions.names, n):
                if not must_change <= set(changed):
                    continue
                masks = positions.masks(model, changed, current)
                if masks is None:  # no stage option keeps and changes these: no row can
                    continue
                model.allowed = masks
                remaining = max(time_limit_s - (time.perf_counter() - t0), 0.0)
                found = run_engine(model, "enumerate", want, remaining)
                proven &= found.proven_optimal
                evaluated += found.evaluated
                capped |= len(found.rows) >= want
                if len(found.rows):
                    batches.append((frozenset(changed), found.rows))
            model.allowed = {}
            why = {**shared, **blocked}
            kept, consumed, cut = _finish(
                spec, model, positions, batches, current, why, outside, (samples, deadline),
                verdicts,
            )  # fmt: skip
            # A capped set's unseen rows rank after its want-th row; they can matter only if
            # the full model dropped so many rows that the merge went that deep.
            thin = len(kept) < spec.ranking.top or consumed > want
            if cut or not (capped and thin) or time.perf_counter() > deadline:
                if cut or (capped and thin):
                    proven = False
                break
            want *= 4
        if kept:
            break
        if time.perf_counter() > deadline:  # larger counts not searched: no proof of none
            proven &= n == len(positions.names)
            break

    # The original passes when it is itself the 0-change answer: the full model alone does not
    # see the spec's limits, the cost cap or the stock.
    original_passes = bool(kept) and not kept[0].changed
    if full_model_passes and not original_passes and not blocked and not shared:
        reasons += [
            f"{current[d]} is outside the spec's limits or stock"
            if d in current
            else f"{d}: none on the board, and every usable stage has one"
            for d in sorted(outside)
        ]
        errors = [w.code for w in warnings_for(original, spec) if w.severity == "error"]
        if errors:
            reasons.append(f"a check of error severity fails: {', '.join(errors)}")
        elif not outside:
            reasons.append(
                "the search model rejects this combination (cost cap, capacitor voltage, or "
                "its tolerance estimate under the spec's guarantee)"
            )

    infeasible = None
    if not kept and proven:  # a cut search proves no absence
        infeasible = Infeasible(reasons=infeasible_reasons(model, reduced, deadline=deadline))
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


def verdict(spec: Spec, design: AnyBoard, samples: int) -> tuple[Analysis, list[Warning]] | None:
    """``design``'s analysis and checks when it meets the spec as the fixed search's re-check
    decides (``passes``: the acceptance and the guarantee, and no check of error severity,
    ``designs.candidate.warnings_for``), else None. The cheap checks come first (the
    acceptance, the checks, then under a worst-case guarantee the worst case alone, which the
    analysis remembers), so a rejected row costs no Monte Carlo run."""
    if not accepts(spec, design):
        return None
    warnings = warnings_for(design, spec)
    if any(w.severity == "error" for w in warnings):
        return None
    if spec.limits.guarantee == "worst_case" and not guarantee_holds(
        spec, worst_case(design, spec), None
    ):
        return None
    result = analyse(design, spec, samples=samples)
    if not guarantee_holds(spec, result.worst_case, result.yield_result):
        return None
    return result, warnings


def _finish(
    spec: Spec,
    model: SearchModel,
    positions: Positions,
    batches: list[tuple[frozenset[str], Rows]],
    current: dict[str, str],
    blocked: dict[str, str],
    outside: set[str],
    budget: tuple[int, float],
    verdicts: dict[tuple[str, ...], tuple[Analysis, list[Warning]] | None],
) -> tuple[list[ReoptimisedCandidate], int, bool]:
    """Merge the batches of one change count in rank order (ties: fewer stage positions
    changed, then the capacitor kept, then stock codes); keep those the full model passes.
    Also returns how many merged rows were consumed (kept or dropped), and whether the
    deadline cut the merge. ``budget``: the analysis's Monte Carlo samples and the deadline
    (``time.perf_counter()``); ``verdicts`` remembers each board's verdict (stock codes ->
    analysis and checks, or None) across calls."""
    ranked = []
    capacitor = positions.form.capacitor
    for changed, rows in batches:
        stage_changes = sum(d in changed for d in positions.stage)
        for n in range(len(rows)):
            if isinstance(rows, BranchRows):
                key = branch_rank_key(model, rows, n)
            else:
                key = rank_key(model, rows, n)
            tie = (stage_changes, capacitor in changed)
            ranked.append(((key[0], key[1], *tie, *key[2:]), changed, rows, n))
    ranked.sort(key=lambda item: item[0])
    samples, deadline = budget
    out: list[ReoptimisedCandidate] = []
    consumed = 0
    for _, changed, rows, n in ranked:
        if len(out) >= spec.ranking.top:
            break
        if consumed and time.perf_counter() > deadline:
            return out, consumed, True
        consumed += 1
        d = design_of(model, rows, n)
        ids = tuple(p.id for p in d.parts().values())
        if ids not in verdicts:
            verdicts[ids] = verdict(spec, d, samples)
        found = verdicts[ids]
        if found is None:
            continue
        result, warnings = found
        base = candidate(spec, d, result, len(out) + 1, int(rows.primary[n]), warnings)
        names = [x for x in positions.names if x in changed]
        new_ids = {k: v.id for k, v in base.parts.items()}
        changes = changes_of(names, current, new_ids, blocked, outside)
        out.append(ReoptimisedCandidate(**base.model_dump(), changed=names, changes=changes))
    return out, consumed, False
