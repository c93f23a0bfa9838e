"""One affected design's options for the joint proposal, and lower bounds on their cost.

Run once per affected design (on a Dask worker, ``tristock.registry.runner``) against the
*residual* catalog: each stock count less what the unaffected designs' planned builds need.
Every option of the joint proposal must fit there on its own, so everything below holds for
the joint problem too.

- ``L0``: the fewest changed designators of any design meeting the spec that fits the residual
  stock (``tristock.designs.reoptimise``, exact and proven, dispatching fixed, trimmed and tuned
  designs). Its answers (up to ``top``) are options; when the design fits as it is, its
  0-change answer is the option "keep".
- For each non-empty set S of the over-subscribed codes the design uses (every set when there
  are at most ``MAX_SUBSETS`` codes; else each code alone and all of them): the fewest
  changes of a design that uses every code of S fewer times than released, found by the same
  re-optimisation on the residual catalog with the stock of each code c of S lowered to
  boards x (released pieces of c - 1) (at most its residual); its answers are options too.
  When one of the L0 answers already reduces every code of S, that fewest is L0 (it cannot be
  less) and no search is needed: the usual case of a code whose stock is gone.

The relaxation (``tristock.registry.joint``) bounds the changes of every option by how it
treats the over-subscribed codes. An option *reduces* the codes whose pieces per board it
lowers (it keeps or raises the others). Its changes are at least L0, at least the number of
codes it reduces (one changed designator lowers one code), and at least the fewest changes
for S whenever it reduces every code of S; when no design reduces all of S (proven), no option
does. ``Bound(S, n)`` records these; a re-optimisation cut by its time limit gives no bound
(the weaker ones remain) and clears ``proven``.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from itertools import combinations
from typing import Any

from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import ReoptimisedCandidate, ReoptimiseResult
from tristock.registry.release import with_stock
from tristock.spec.loading import parse_spec
from tristock.stock.catalog import Catalog

#: Over-subscribed codes of one design whose subsets are bounded one by one (more: the set of
#: all of them only, with the |S| bound for the rest).
MAX_SUBSETS = 3


@dataclass(frozen=True)
class OptionTask:
    """What one design's option search needs (pickled to a Dask worker)."""

    name: str
    revision: int
    spec: dict[str, Any]
    design: dict[str, Any]
    boards: int
    over: tuple[str, ...]  # the over-subscribed codes this design uses
    top: int
    time_limit_s: float
    without: tuple[str, ...] = ()  # codes withheld (a later round: codes in contention)


@dataclass(frozen=True)
class Option:
    """One way to build the design: its parts, changes and pieces per board by stock code."""

    parts: dict[str, str]
    changed: tuple[str, ...]
    pieces: dict[str, int]
    predicted: dict[str, Any]
    yield_fraction: float
    cost: float
    wiper: float | None = None


@dataclass(frozen=True)
class Bound:
    """Options that reduce exactly the codes ``reduces`` change at least ``changes``
    designators (None: no such option exists, proven)."""

    reduces: tuple[str, ...]
    changes: int | None


@dataclass(frozen=True)
class DesignOptions:
    name: str
    revision: int
    options: tuple[Option, ...]
    bounds: tuple[Bound, ...]
    proven: bool  # every re-optimisation finished within its time limit
    elapsed_s: float
    searches: int = 0
    notes: tuple[str, ...] = field(default=())


def _pieces(parts: dict[str, str], catalog: Catalog) -> dict[str, int]:
    """Pieces per board of each stock code: one per designator, but an op amp U1 doing both
    jobs (no comparator IC U2) takes its ``packages_per_board``."""
    out: dict[str, int] = {}
    for designator, part_id in parts.items():
        part = catalog.get(part_id) if part_id in catalog else None
        both = designator == "U1" and "U2" not in parts
        n = getattr(part, "packages_per_board", 1) if both else 1
        out[part_id] = out.get(part_id, 0) + n
    return out


def _option(c: ReoptimisedCandidate, catalog: Catalog) -> Option:
    parts = {k: v.id for k, v in c.parts.items()}
    return Option(
        parts=parts,
        changed=tuple(c.changed),
        pieces=_pieces(parts, catalog),
        predicted=c.predicted.model_dump(mode="json"),
        yield_fraction=c.yield_fraction,
        cost=c.cost,
        wiper=c.trim.wiper_nominal if c.trim is not None else None,
    )


def option_order(option: Option) -> tuple[int, float, list[tuple[str, str]]]:
    """A design's options in order: fewest changes, then cost, then stock codes."""
    return (len(option.changed), option.cost, sorted(option.parts.items()))


def _fewest(result: ReoptimiseResult) -> int | None:
    """The proven fewest changes of a re-optimisation; None when none exists (proven)."""
    if result.candidates:
        return len(result.candidates[0].changed)
    return None


def design_options(task: OptionTask, residual: Catalog) -> DesignOptions:
    """The options and bounds of one affected design on the residual catalog."""
    t0 = time.perf_counter()
    spec = parse_spec(task.spec)
    parts: dict[str, str] = dict(task.design["parts"])
    released = _pieces(parts, residual)
    options: dict[tuple[tuple[str, str], ...], Option] = {}
    proven = True
    searches = 0

    def search(reduced: tuple[str, ...]) -> int | None:
        nonlocal proven, searches
        lowered = {  # a code gone from the catalog cannot be used at all already
            c: max(min(task.boards * (released[c] - 1), residual.get(c).stock), 0)
            for c in reduced
            if c in residual
        }
        result = reoptimise(
            spec,
            with_stock(residual, lowered),
            parts,
            without=task.without,
            boards=task.boards,
            top=task.top,
            time_limit_s=task.time_limit_s,
            topology=task.design.get("topology"),
        )
        searches += 1
        finished = result.search.proven_optimal
        proven &= finished
        for c in result.candidates:
            option = _option(c, residual)
            options.setdefault(tuple(sorted(option.parts.items())), option)
        if not finished:
            return -1  # no proven count: the caller keeps the weaker bounds
        return _fewest(result)

    l0 = search(())
    if l0 is None:  # nothing meets the spec on the residual stock at all (proven)
        none = (Bound(reduces=(), changes=None),)
        return DesignOptions(
            task.name, task.revision, (), none, proven, time.perf_counter() - t0, searches
        )
    bounds = [Bound(reduces=(), changes=max(l0, 0))]
    first = list(options.values())  # the L0 answers
    for subset in _subsets(task.over)[1:]:
        if l0 >= 0 and any(all(o.pieces.get(c, 0) < released[c] for c in subset) for o in first):
            # an answer with the fewest changes of all reduces S already: S's fewest is L0
            bounds.append(Bound(reduces=subset, changes=l0))
            continue
        fewest = search(subset)
        if fewest is None or fewest >= 0:
            bounds.append(Bound(reduces=subset, changes=fewest))
    ordered = sorted(options.values(), key=option_order)
    return DesignOptions(
        task.name,
        task.revision,
        tuple(ordered),
        tuple(bounds),
        proven,
        time.perf_counter() - t0,
        searches,
    )


def more_options(task: OptionTask, residual: Catalog) -> DesignOptions:
    """More options of one design for a later round: the fewest-changes answers without the
    codes ``task.without`` (those in contention). No bounds: the first round's stand."""
    t0 = time.perf_counter()
    result = reoptimise(
        parse_spec(task.spec),
        residual,
        dict(task.design["parts"]),
        without=task.without,
        boards=task.boards,
        top=task.top,
        time_limit_s=task.time_limit_s,
        topology=task.design.get("topology"),
    )
    found = tuple(_option(c, residual) for c in result.candidates)
    return DesignOptions(
        task.name,
        task.revision,
        found,
        (),
        result.search.proven_optimal,
        time.perf_counter() - t0,
        1,
    )


def _subsets(codes: tuple[str, ...]) -> list[tuple[str, ...]]:
    """Every subset of ``codes`` (the empty one first) when there are at most MAX_SUBSETS;
    else the empty set, each code alone and all of them."""
    if len(codes) <= MAX_SUBSETS:
        return [s for n in range(len(codes) + 1) for s in combinations(codes, n)]
    return [(), *((c,) for c in codes), codes]
