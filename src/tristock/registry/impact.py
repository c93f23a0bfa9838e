"""Which released boards can no longer be built, and the fewest changes that build them all.

A stock code is *over-subscribed* when its stock is less than what all active planned builds
that use it need together (boards x pieces per board, the latest revision of every design
not retired). Every design using an over-subscribed code is *affected*; only those are
re-solved (``tristock.registry.options``, one task per design on Dask), the others keep their
parts and their builds are reserved first. The joint proposal and its proof:
``tristock.registry.joint``. When the proposal is not proven, the designs whose every option
uses a congested code (one the options together could ask more of than its residual stock)
are re-optimised without the congested codes, and the proposal is made again (up to
``extra_rounds`` times); the lower bound does not depend on the options, so the proof stays
sound. Nothing is written: ``tristock designs accept`` records a
proposal's change as a new revision.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass
from typing import Any

from tristock.registry.impact_report import (
    AffectedDesign,
    Allocation,
    CodeNeed,
    DesignNeed,
    DesignWork,
    Figures,
    ImpactReport,
    OverSubscribed,
    PartChange,
    Proposal,
    ProposedDesign,
    StockOverride,
)
from tristock.registry.joint import Affected, JointAnswer, solve_joint
from tristock.registry.options import (
    DesignOptions,
    Option,
    OptionTask,
    design_options,
    more_options,
    option_order,
)
from tristock.registry.records import RevisionOut
from tristock.registry.release import catalog_fingerprint, with_stock
from tristock.registry.runner import describe, run_all
from tristock.stock.catalog import Catalog


@dataclass(frozen=True)
class ImpactSettings:
    """``top``: answers kept per re-optimisation; ``time_limit_s``: each re-optimisation's
    limit; ``joint_time_limit_s``: each of the two joint solves' limit."""

    top: int = 5
    time_limit_s: float = 5.0
    joint_time_limit_s: float = 30.0
    extra_rounds: int = 2
    workers: int | None = None
    scheduler: str | None = None


def planned_needs(active: list[RevisionOut]) -> dict[str, dict[str, int]]:
    """Stock code -> design name -> pieces its planned build needs (boards x pieces)."""
    needs: dict[str, dict[str, int]] = {}
    for rev in active:
        for code, pieces in rev.pieces.items():
            needs.setdefault(code, {})[rev.name] = rev.boards * pieces
    return needs


def stock_of(catalog: Catalog, code: str) -> int:
    """Pieces on hand; a code no longer in the catalog has none."""
    return catalog.get(code).stock if code in catalog else 0


def over_subscribed(active: list[RevisionOut], catalog: Catalog) -> list[OverSubscribed]:
    out = []
    for code, by_design in sorted(planned_needs(active).items()):
        needed, stock = sum(by_design.values()), stock_of(catalog, code)
        if stock < needed:
            out.append(
                OverSubscribed(
                    id=code,
                    stock=stock,
                    needed=needed,
                    short=needed - stock,
                    designs=[DesignNeed(name=n, needed=v) for n, v in sorted(by_design.items())],
                )
            )
    return out


def affected_by(active: list[RevisionOut], catalog: Catalog, part_id: str) -> list[str]:
    """Names of the active designs using ``part_id`` when their planned builds together need
    more than its stock (empty when the stock covers them all)."""
    users = {r.name: r.boards * r.pieces[part_id] for r in active if part_id in r.pieces}
    if sum(users.values()) <= stock_of(catalog, part_id):
        return []
    return sorted(users)


def impact(
    active: list[RevisionOut],
    catalog: Catalog,
    settings: ImpactSettings | None = None,
    what_if: dict[str, tuple[int, int]] | None = None,
) -> ImpactReport:
    """The impact report of the active designs on ``catalog`` (with ``what_if``: part ->
    (stock before, stock after) applied in memory)."""
    t0 = time.perf_counter()
    settings = settings or ImpactSettings()
    what_if = what_if or {}
    catalog = with_stock(catalog, {code: after for code, (_, after) in what_if.items()})
    overs = over_subscribed(active, catalog)
    over_codes = {o.id for o in overs}
    by_name = {rev.name: rev for rev in active}
    hit = sorted({d.name for o in overs for d in o.designs})
    needs = planned_needs(active)
    base = ImpactReport(
        catalog_fingerprint=catalog_fingerprint(catalog),
        what_if=[
            StockOverride(id=k, stock_before=b, stock_after=a) for k, (b, a) in what_if.items()
        ],
        active_designs=len(active),
        over_subscribed=overs,
        affected=[_affected(by_name[n], catalog, over_codes) for n in hit],
        proposal=None,
        no_proposal_reason=None,
        message="",
        work=[],
        extra_rounds=0,
        scheduler=describe(settings.workers, settings.scheduler),
        elapsed_s=0.0,
    )
    if not overs:
        return base.model_copy(
            update={
                "message": "nothing is over-subscribed: every active planned build is covered",
                "elapsed_s": round(time.perf_counter() - t0, 4),
            }
        )
    unaffected = {code: sum(v for n, v in d.items() if n not in hit) for code, d in needs.items()}
    residual = {p.id: p.stock - unaffected.get(p.id, 0) for p in catalog}
    residual_catalog = with_stock(
        catalog, {k: max(v, 0) for k, v in residual.items() if k in needs}
    )
    tasks = [_task(by_name[n], over_codes, settings) for n in hit]
    found = run_all(
        design_options,
        tasks,
        residual_catalog,
        workers=settings.workers,
        scheduler=settings.scheduler,
    )
    affected = [
        Affected(
            options=o, boards=by_name[o.name].boards, pieces=by_name[o.name].pieces, over=t.over
        )
        for o, t in zip(found, tasks, strict=True)
    ]
    stock = {p.id: p.stock for p in catalog}
    answer = solve_joint(affected, residual, stock, settings.joint_time_limit_s)
    rounds = 0
    withheld: set[str] = set()
    while not answer.proven and rounds < settings.extra_rounds:
        if not _widen(affected, tasks, residual, residual_catalog, withheld, settings):
            break
        rounds += 1
        answer = solve_joint(affected, residual, stock, settings.joint_time_limit_s)
    found = [a.options for a in affected]
    work = [
        DesignWork(
            name=o.name,
            options=len(o.options),
            searches=o.searches,
            seconds=round(o.elapsed_s, 4),
            proven=o.proven,
        )
        for o in found
    ]
    proposal, reason = _proposal(answer, affected, by_name, residual, unaffected, stock)
    codes = ", ".join(o.id for o in overs)
    message = f"{len(overs)} over-subscribed code(s) ({codes}) affect {len(hit)} design(s)"
    return base.model_copy(
        update={
            "proposal": proposal,
            "no_proposal_reason": reason,
            "message": message,
            "work": work,
            "extra_rounds": rounds,
            "elapsed_s": round(time.perf_counter() - t0, 4),
        }
    )


def _task(rev: RevisionOut, over: set[str], settings: ImpactSettings) -> OptionTask:
    return OptionTask(
        name=rev.name,
        revision=rev.revision,
        spec=rev.spec,
        design=rev.design,
        boards=rev.boards,
        over=tuple(sorted(c for c in rev.pieces if c in over)),
        top=settings.top,
        time_limit_s=settings.time_limit_s,
    )


def _widen(
    affected: list[Affected],
    tasks: list[OptionTask],
    residual: dict[str, int],
    residual_catalog: Catalog,
    withheld: set[str],
    settings: ImpactSettings,
) -> bool:
    """One widening round: add the congested codes to ``withheld`` and give every design
    whose options all use one of them the answers without them (``affected`` is updated in
    place). False when there is nothing new to withhold or no design to widen."""
    congested = _congested(affected, residual)
    if congested <= withheld:
        return False
    withheld |= congested
    crowded = [
        n
        for n, a in enumerate(affected)
        if all(set(o.pieces) & withheld for o in a.options.options)
    ]
    if not crowded:
        return False
    more = run_all(
        more_options,
        [dataclasses.replace(tasks[n], without=tuple(sorted(withheld))) for n in crowded],
        residual_catalog,
        workers=settings.workers,
        scheduler=settings.scheduler,
    )
    for n, extra in zip(crowded, more, strict=True):
        affected[n] = _widened(affected[n], extra)
    return True


def _congested(affected: list[Affected], residual: dict[str, int]) -> set[str]:
    """Codes that the options could ask more of than the residual stock holds: for each code,
    the sum over designs of the most any one of its options needs."""
    demand: dict[str, int] = {}
    for a in affected:
        most: dict[str, int] = {}
        for option in a.options.options:
            for code, pieces in option.pieces.items():
                most[code] = max(most.get(code, 0), a.boards * pieces)
        for code, need in most.items():
            demand[code] = demand.get(code, 0) + need
    return {c for c, need in demand.items() if need > residual.get(c, 0)}


def _widened(a: Affected, extra: DesignOptions) -> Affected:
    """``a`` with the new options of ``extra`` added (in the options' order)."""
    known = {tuple(sorted(o.parts.items())) for o in a.options.options}
    new = [o for o in extra.options if tuple(sorted(o.parts.items())) not in known]
    merged = dataclasses.replace(
        a.options,
        options=tuple(sorted([*a.options.options, *new], key=option_order)),
        proven=a.options.proven and extra.proven,
        elapsed_s=a.options.elapsed_s + extra.elapsed_s,
        searches=a.options.searches + extra.searches,
    )
    return dataclasses.replace(a, options=merged)


def _affected(rev: RevisionOut, catalog: Catalog, over: set[str]) -> AffectedDesign:
    return AffectedDesign(
        name=rev.name,
        revision=rev.revision,
        kind=rev.kind,
        boards=rev.boards,
        codes=[
            CodeNeed(id=c, needed=rev.boards * p, stock=stock_of(catalog, c))
            for c, p in sorted(rev.pieces.items())
            if c in over
        ],
    )


def _before(rev: RevisionOut) -> Figures:
    predicted = rev.analysis.get("predicted") or {}
    return Figures(
        frequency_hz=predicted.get("frequency_hz"),
        amplitude_vpp=predicted.get("amplitude_vpp"),
        yield_fraction=rev.analysis.get("yield_fraction"),
        cost=rev.analysis.get("cost"),
    )


def _proposed(rev: RevisionOut, option: Option) -> ProposedDesign:
    before = rev.parts
    names = [*before, *(d for d in option.parts if d not in before)]
    changes = [
        PartChange(designator=d, from_id=before.get(d), to_id=option.parts.get(d))
        for d in names
        if before.get(d) != option.parts.get(d)
    ]
    after: dict[str, Any] = {"parts": dict(option.parts)}
    if option.wiper is not None:
        after["wiper"] = option.wiper
    elif "wiper" in rev.design and not changes:
        after["wiper"] = rev.design["wiper"]
    if "range" in rev.design:
        after["range"] = rev.design["range"]
    if "topology" in rev.design:
        after["topology"] = rev.design["topology"]
    return ProposedDesign(
        name=rev.name,
        revision=rev.revision,
        changed=[c.designator for c in changes],
        changes=changes,
        design_after=after,
        before=_before(rev),
        after=Figures(
            frequency_hz=option.predicted.get("frequency_hz"),
            amplitude_vpp=option.predicted.get("amplitude_vpp"),
            yield_fraction=option.yield_fraction,
            cost=option.cost,
        ),
    )


def _proposal(
    answer: JointAnswer,
    affected: list[Affected],
    by_name: dict[str, RevisionOut],
    residual: dict[str, int],
    unaffected: dict[str, int],
    stock: dict[str, int],
) -> tuple[Proposal | None, str | None]:
    if answer.chosen is None:
        if answer.infeasible_proven:
            return (
                None,
                "no proposal exists: no choice of designs meeting their specs fits the stock",
            )
        return None, (
            f"no proposal among the re-optimisations' answers (solver: {answer.status}); "
            "a longer --time-limit or a larger stock may find one"
        )
    allocated: dict[str, dict[str, int]] = {}
    for a in affected:
        option = answer.chosen[a.options.name]
        for code, pieces in option.pieces.items():
            allocated.setdefault(code, {})[a.options.name] = a.boards * pieces
    allocation = [
        Allocation(
            id=code,
            stock=stock.get(code, 0),
            unaffected=unaffected.get(code, 0),
            allocated=dict(sorted(by.items())),
            spare=residual.get(code, 0) - sum(by.values()),
        )
        for code, by in sorted(allocated.items())
    ]
    designs = [_proposed(by_name[a.options.name], answer.chosen[a.options.name]) for a in affected]
    return (
        Proposal(
            total_changes=answer.changes or 0,
            lower_bound=answer.lower_bound,
            proven=answer.proven,
            status=answer.status,
            designs=designs,
            allocation=allocation,
            solve_s=round(answer.solve_s, 4),
            bound_s=round(answer.bound_s, 4),
        ),
        None,
    )


__all__ = ["ImpactSettings", "affected_by", "impact", "over_subscribed", "planned_needs"]
