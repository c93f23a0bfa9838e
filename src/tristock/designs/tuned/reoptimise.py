"""Re-optimise a tuned design when stock changes: the fewest changed designators.

Designators: the shared U1, R1, R2, R3, RV1 (and R4 for the divider) and the range slots
C1..Cm. A new design with n ranges changes a shared designator when its part differs, a slot
s ≤ min(n, m) when its capacitor differs, and every range added or removed counts once.
Parts named unavailable, no longer in the catalog, short of stock or outside the spec's
limits cannot stay where they are (a code short only because it fills several positions may
stay in one of them; the search's stock rule decides which).

For c = 0, 1, 2, ... changes, every split of c into a set S of changed shared designators
(the others pinned to their part, those in S forced to another) and c - |S| changed slots is
searched exactly by the tuned walk (``search.Lister``, with the chain rule
``chains.Changes``), every range count n allowed (or the spec's fixed count), and the
candidates of all splits are merged in rank order (n, cost, evenness, stock codes) and
decided by the full model's verdict. The first c with an accepted design is the minimum: every
smaller c was searched completely and had none (unless a time limit cut it, which the result
says).
"""

from __future__ import annotations

import dataclasses
import heapq
import time
from collections.abc import Iterator, Sequence
from itertools import combinations
from typing import Any

from tristock.analysis.bundle import analyse
from tristock.circuits.board import resolve
from tristock.designs.changes import blocked_positions, check_withdrawn, with_build, without_parts
from tristock.designs.results import (
    Change,
    Infeasible,
    OriginalDesign,
    Predicted,
    ReoptimisedCandidate,
    ReoptimiseResult,
    SearchInfo,
)
from tristock.designs.tuned.chains import Changes
from tristock.designs.tuned.cores import build_cores
from tristock.designs.tuned.coverage import proxy_spec_at
from tristock.designs.tuned.model import MAX_RANGES, TunedModel, build_tuned_model
from tristock.designs.tuned.pins import masks, part_index, tuned_shortfall
from tristock.designs.tuned.report import design_from, reasons, tuned_candidate
from tristock.designs.tuned.search import Found, Lister, Walk, certified
from tristock.designs.tuned.verdict import Verdicts
from tristock.search.model import SCORE_RESOLUTION
from tristock.search.parts import PartTable
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

#: After this many changes without an answer, check once that any design meets the spec.
FREE_CHECK = 2


def shared_designators(spec: Spec) -> tuple[str, ...]:
    assert spec.tuning is not None
    base = ("U1", "R1", "R2", "R3")
    return (*base, "R4", "RV1") if spec.tuning.control == "divider" else (*base, "RV1")


def slots_of(current: dict[str, str]) -> list[str]:
    return [f"C{s}" for s in range(1, 9) if f"C{s}" in current]


def reoptimise_tuned(
    spec: Spec,
    catalog: Catalog,
    current: dict[str, str],
    *,
    without: Sequence[str] = (),
    boards: int | None = None,
    top: int | None = None,
    time_limit_s: float = 5.0,
    samples: int = 4000,
) -> ReoptimiseResult:
    """Tuned designs meeting ``spec`` that change the fewest designators of ``current``."""
    assert spec.tuning is not None
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    spec = with_build(spec, boards, top)
    shared = shared_designators(spec)
    tuning = spec.tuning
    assert tuning is not None
    missing = [d for d in (*shared, "C1") if d not in current]
    extra = ["R4"] if "R4" in current and "R4" not in shared else []
    if missing or extra:
        raise SpecError(
            [f"parts.{d}: missing" for d in missing]
            + [f"parts.{d}: only the divider control has an end stop R4" for d in extra]
        )
    check_withdrawn(catalog, without)
    n_boards = spec.build.boards
    slots = slots_of(current)
    designators = [*shared, *slots]
    short = {s.id: s for s in tuned_shortfall(catalog, current, n_boards)}
    # a code short only for filling several positions is left to the search's stock rule
    blocked, _ = blocked_positions(
        catalog, current, without, short, n_boards, designators, designators
    )
    reduced = without_parts(catalog, without)
    model = build_tuned_model(spec, reduced)
    pinned = {d: part_index(model, d, current[d]) for d in designators}
    for d in designators:
        if pinned[d] is None and d not in blocked:
            blocked[d] = f"{current[d]} is outside the spec's limits or stock"
    old = tuple(
        -1 if (pinned[s] is None or s in blocked) else int(pinned[s])  # type: ignore[arg-type]
        for s in slots
    )
    forced = tuple(d for d in shared if d in blocked)
    walk = Walk()
    accepted, cut = _fewest_changes(
        spec, model, Plan(shared, slots, forced, pinned, old), walk, deadline, samples
    )
    candidates = [
        _candidate(spec, current, slots, blocked, i + 1, f, detail, samples)
        for i, (f, detail) in enumerate(accepted)
    ]
    original_passes = bool(candidates) and not candidates[0].changed
    reasons_original = list(dict.fromkeys(blocked.values()))
    predicted = None
    before: dict[str, Any] = {}  # the original's yield and worst case at mid-dial of C1
    if all(pid in catalog for pid in current.values()):
        board = resolve(current, catalog, wiper=0.5, control=tuning.control)
        proxy = proxy_spec_at(spec, board)
        figures = analyse(board, proxy, samples=min(samples, 2000)).to_dict()
        predicted = Predicted(**figures["predicted"])
        before = {k: figures[k] for k in ("yield_fraction", "worst_case")}
        if not original_passes and not blocked:
            reasons_original.append(
                "the full model puts it outside the spec (a range, the coverage or the "
                "amplitude guarantee fails) or the cost cap excludes it"
            )
    infeasible = None
    if not candidates and not cut:
        infeasible = Infeasible(
            reasons=[*reasons_original, *reasons(model, MAX_RANGES + 1, walk.dropped, None)]
        )
    return ReoptimiseResult(
        spec=spec,
        original=OriginalDesign(
            parts=dict(current),
            passes=original_passes,
            reasons=reasons_original,
            predicted=predicted,
            **before,
        ),
        candidates=candidates,
        infeasible=infeasible,
        shortfall=list(short.values()),
        search=SearchInfo(
            engine="tuned-exact",
            proven_optimal=not cut and walk.proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=walk.combinations,
            evaluated=walk.evaluated,
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=walk.dropped,
            time_limit_s=time_limit_s,
        ),
    )


@dataclasses.dataclass(frozen=True)
class Plan:
    """What re-optimisation keeps and changes: shared designators, old slots, those forced
    to change, each designator's part index (None: not usable) and the old chain."""

    shared: tuple[str, ...]
    slots: list[str]
    forced: tuple[str, ...]
    pinned: dict[str, int | None]
    old: tuple[int, ...]


def _fewest_changes(
    spec: Spec, model: TunedModel, plan: Plan, walk: Walk, deadline: float, samples: int
) -> tuple[list[tuple[Found, list[object]]], bool]:
    """Accepted designs with the fewest changes, in rank order, and whether the time limit
    cut the search (then the free search's best design is offered when there is nothing
    else, and nothing is proven)."""
    verdicts = Verdicts(model, samples, 0)
    most = len(plan.shared) + MAX_RANGES + len(plan.slots)
    fallback: list[tuple[Found, list[object]]] = []
    c = -1
    while c < most:
        c += 1
        if c == FREE_CHECK:
            free = _any_design(model, deadline)
            if free is None:
                return [], True
            if not free.accepted:
                return [], False
            fallback = [(f, d) for f, d in free.accepted]
        streams, listers, cut = _streams(spec, model, plan, c, walk, deadline)
        accepted: list[tuple[Found, list[object]]] = []
        for _, f in heapq.merge(*streams, key=lambda x: (x[0], x[1].key)):
            ok, detail = verdicts(f)
            if ok:
                accepted.append((f, detail))
                walk.proven &= certified(f)
                if len(accepted) >= spec.ranking.top:
                    break
            else:
                walk.dropped += 1
            if time.perf_counter() > deadline:
                cut = True
                break
        cut = cut or any(x.cut for x in listers) or time.perf_counter() > deadline
        if accepted:
            walk.proven = walk.proven and not (cut and len(accepted) < spec.ranking.top)
            return accepted, False
        if cut:
            walk.proven = False
            return fallback, True
    return [], False


def _streams(
    spec: Spec, model: TunedModel, plan: Plan, c: int, walk: Walk, deadline: float
) -> tuple[list[Iterator[tuple[int, Found]]], list[Lister], bool]:
    """One ordered stream of candidates per split of c changes (module docstring)."""
    streams: list[Iterator[tuple[int, Found]]] = []
    listers: list[Lister] = []
    for k in range(len(plan.forced), min(c, len(plan.shared)) + 1):
        for changed in combinations(plan.shared, k):
            if not set(plan.forced) <= set(changed):
                continue
            pins = masks(model, plan.shared, changed, plan.pinned)
            if pins is None:
                continue
            sub = dataclasses.replace(model, allowed=pins)
            for n in _counts(spec):
                if abs(n - len(plan.slots)) > c - k:
                    continue
                if c == k:  # no slot may change: only the old capacitors take part
                    use, rule = _kept_chain(sub, plan.old)
                else:
                    use, rule = sub, Changes(old=plan.old, count=c - k)
                if use is None:
                    continue
                cores = build_cores(use, deadline)
                if cores is None:
                    return streams, listers, True
                lister = Lister(use, cores, n, walk, deadline, rule)
                listers.append(lister)
                streams.append(_stream(lister, n))
    return streams, listers, False


def _any_design(model: TunedModel, deadline: float) -> Walk | None:
    """The free search's best design (no position pinned): none accepted means no design
    meets the spec at all; None when the time ran out first."""
    from tristock.designs.tuned.search import walk as free_walk

    free = dataclasses.replace(model, allowed={})
    found = free_walk(free, 1, deadline, Verdicts(free, 200, 0))
    if not found.proven and not found.accepted:
        return None
    return found


def _kept_chain(model: TunedModel, old: tuple[int, ...]) -> tuple[TunedModel | None, Changes]:
    """The model restricted to the old chain's capacitors (None when one cannot be used),
    and the rule "no slot changes" in its indices."""
    if any(j < 0 for j in old):
        return None, Changes(old=(), count=0)
    keep = sorted(set(old))
    table = PartTable.of([model.capacitors.parts[j] for j in keep])
    index = {p.id: i for i, p in enumerate(table.parts)}
    new_old = tuple(index[model.capacitors.parts[j].id] for j in old)
    return dataclasses.replace(model, capacitors=table), Changes(old=new_old, count=0)


def _counts(spec: Spec) -> list[int]:
    assert spec.tuning is not None
    want = spec.tuning.ranges
    return list(range(1, MAX_RANGES + 1)) if want == "auto" else [int(want)]


def _stream(lister: Lister, n: int) -> Iterator[tuple[int, Found]]:
    for f in lister:
        yield n, f


def _candidate(
    spec: Spec,
    current: dict[str, str],
    slots: list[str],
    blocked: dict[str, str],
    rank: int,
    f: Found,
    detail: list[object],
    samples: int,
) -> ReoptimisedCandidate:
    from tristock.designs.tuned.coverage import RangeVerdict

    d = design_from(f.model, f.row, f.chain)
    verdicts = [v for v in detail if isinstance(v, RangeVerdict)]
    base = tuned_candidate(spec, d, verdicts, rank, f.cost, min(samples, 2000), 0)
    new_ids = {k: v.id for k, v in base.parts.items()}
    names = [x for x in shared_designators(spec) if new_ids.get(x) != current.get(x)]
    n = len(f.chain)
    for s in range(1, max(n, len(slots)) + 1):
        name = f"C{s}"
        if new_ids.get(name, "") != current.get(name, ""):
            names.append(name)
    changes = []
    for x in names:
        was, now = current.get(x, ""), new_ids.get(x, "")
        if x in blocked:
            why = blocked[x]
        elif not was:
            why = "a range added to cover the span"
        elif not now:
            why = "a range no longer needed"
        else:
            others = ", ".join(o for o in names if o != x) or "nothing else"
            why = f"re-chosen with {others} to bring the design back into spec"
        changes.append(Change(designator=x, from_id=was, to_id=now, why=why))
    return ReoptimisedCandidate(**base.model_dump(), changed=names, changes=changes)
