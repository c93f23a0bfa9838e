"""The walk: cells in order of their resolution bound, rows decided by the full model, the
final coverage check in exact rank order, and the rule that stops it.

A ``TrimSearch`` lists the cells of one context (``trim.cells``) sorted by the lower bound of
the resolution of every row in them, and opens them in that order, a batch at a time; its
``bound_q`` is the quantised bound of every row not yet opened. Rows come back as candidates
with their exact rank key: (resolution, drift, cost) in integer steps, then the stock codes
of U1, R1, R2, R3, C1 and RV1.

``walk`` merges one or more searches (re-optimisation runs one per set of changed
designators). A candidate whose resolution key is below every search's ``bound_q`` is
settled: no row not yet opened can rank before it, so settled candidates are checked in key
order by the full model's coverage over the spread box (``trim.checks.covers_many``: the
settled candidates that could still be needed are checked together, then taken in order).
The walk stops when ``top`` have passed (proven), when every search is exhausted (proven: fewer
exist), or at the deadline (not proven; what passed so far is returned, in order, and never
reported as infeasible): a batch or a coverage check that would end past it, judged by the
last of its kind, is not begun.
"""

from __future__ import annotations

import heapq
import math
import time
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field

import numpy as np

from tristock.designs.trimmed.cells import Cells, CellSource, expand, no_cells
from tristock.designs.trimmed.checks import covers_many
from tristock.designs.trimmed.context import TrimContext, quantise_score
from tristock.designs.trimmed.pairs import build_pairs
from tristock.designs.trimmed.rows import BOUND_SLACK, RowStats, TrimRows, evaluate, row_design

#: The bound of a search with nothing left to open.
EXHAUSTED = 1 << 62
#: Rows evaluated in the first batch; each later batch grows this much, up to ``MAX_BATCH``.
FIRST_BATCH = 256
BATCH_GROWTH = 2
MAX_BATCH = 1 << 12


class TrimSearch:
    """The cells of one context and the state of their opening (module docstring)."""

    #: Each band of the resolution bound spans [θ0, θ1) with θ1 = GROWTH·(its first bound).
    GROWTH = 1.1

    def __init__(self, ctx: TrimContext, deadline: float) -> None:
        self.ctx = ctx
        self.stats = RowStats()
        self.pairs, listed = build_pairs(ctx, deadline)
        self.source = CellSource(ctx, self.pairs, deadline)
        self.complete = listed and self.source.complete
        self.bounds_held = True
        self.cells: Cells = no_cells()  # the current band
        self.next = 0
        self.theta = 0.0  # every cell with res_lb below this is in a band already listed
        self.start = self.source.next_bound(0.0)  # the least res_lb of the cells not listed
        self.batch = FIRST_BATCH
        self.listed = 0  # cells listed so far

    @property
    def exhausted(self) -> bool:
        return self.next >= len(self.cells) and math.isinf(self.start)

    def bound(self) -> float:
        """A lower bound of the resolution of every row not yet opened (inf if none)."""
        if self.next < len(self.cells):
            return float(self.cells.res_lb[self.next])
        return max(self.start, self.theta)

    def bound_q(self) -> int:
        """Quantised resolution below which no unopened row of this search can score."""
        b = self.bound()
        if math.isinf(b):
            return EXHAUSTED
        return int(quantise_score(b * (1 - BOUND_SLACK)))

    def _next_band(self) -> None:
        lo, first = self.theta, self.start
        hi = max(first * self.GROWTH, first + 1e-9, lo + 1e-9)
        self.cells = self.source.band(lo, hi)
        self.listed += len(self.cells)
        self.next = 0
        self.theta = hi
        self.start = self.source.next_bound(hi)

    def advance(self) -> TrimRows:
        """Open the next batch of cells and return their candidates."""
        while self.next >= len(self.cells) and not math.isinf(self.start):
            self._next_band()
        widths = np.maximum(self.cells.hi[self.next :] - self.cells.lo[self.next :], 0)
        stop = self.next + int(np.searchsorted(np.cumsum(widths), self.batch, side="left")) + 1
        stop = min(stop, len(self.cells))
        u, i1, i2, i3, j, v, cell = expand(self.ctx, self.cells, self.next, stop)
        self.next = stop
        self.batch = min(self.batch * BATCH_GROWTH, MAX_BATCH)
        rows, held = evaluate(self.ctx, (u, i1, i2, i3, j, v), self.cells.res_lb[cell], self.stats)
        self.bounds_held &= held
        return rows

    def ids(self, rows: TrimRows, n: int) -> tuple[str, ...]:
        model = self.ctx.model
        return (
            model.opamps[rows.u[n]].part.id,
            model.resistors.parts[rows.i1[n]].id,
            model.resistors.parts[rows.i2[n]].id,
            model.resistors.parts[rows.i3[n]].id,
            model.capacitors.parts[rows.j[n]].id,
            self.ctx.pots.parts[rows.v[n]].id,
        )


@dataclass
class Accepted:
    """One answer: its search, the row (a one-row ``TrimRows``) and the box reach (Hz)."""

    search: int
    row: TrimRows
    reach: tuple[float, float]


@dataclass
class WalkResult:
    accepted: list[Accepted] = field(default_factory=list)
    dropped: int = 0  # candidates the box coverage check rejected
    proven: bool = True
    cut: bool = False


def walk(
    searches: list[TrimSearch],
    top: int,
    deadline: float,
    tiebreak: Callable[[int], tuple[object, ...]] = lambda _: (),
    classify: Callable[[Accepted], Hashable] | None = None,
) -> WalkResult:
    """The ``top`` best rows of the searches that pass the box coverage check, in rank order
    (module docstring). ``tiebreak(search index)`` is inserted after (resolution, drift,
    cost) in the key, before the stock codes. With ``classify`` (distinct designs) the walk
    goes on until the passed rows fall into ``top`` classes."""
    out = WalkResult()
    classes: set[Hashable] = set()
    if any(not s.complete for s in searches):
        return _cut(out)  # the deadline came while the cells were listed
    pool: list[tuple[int, int, int, tuple[object, ...], tuple[str, ...], int, int, int, TrimRows]]
    pool = []
    seq = 0
    # the time per coverage check and the last batch's: a step that would end past the
    # deadline is not begun (the walk is cut a step early rather than overrunning by one)
    check_s = batch_s = 0.0
    while True:
        bound = min((s.bound_q() for s in searches), default=EXHAUSTED)
        while pool and pool[0][0] < bound:
            # settled candidates, checked together, never more than could still be needed
            now = time.perf_counter()
            room = top - len(classes)
            if check_s > 0.0:
                room = min(room, int((deadline - now) / check_s))
            if room < 1 or now > deadline:
                return _cut(out)
            settled: list[tuple[int, TrimRows]] = []
            while pool and pool[0][0] < bound and len(settled) < room:
                *_, si, n, rows = heapq.heappop(pool)
                settled.append((si, rows.take(np.array([n], dtype=np.int64))))
            designs = [(row_design(searches[si].ctx, row, 0), searches[si].ctx.spec)
                       for si, row in settled]  # fmt: skip
            checked = covers_many(designs)
            check_s = (time.perf_counter() - now) / len(settled)
            for (si, row), (reach, ok) in zip(settled, checked, strict=True):
                if not ok:
                    out.dropped += 1
                    continue
                out.accepted.append(Accepted(si, row, reach))
                classes.add(classify(out.accepted[-1]) if classify else len(out.accepted))
                if len(classes) >= top:
                    return _finish(out, searches)
        if bound >= EXHAUSTED:
            return _finish(out, searches)
        now = time.perf_counter()
        if now + BATCH_GROWTH * batch_s > deadline:  # the next batch is up to twice as big
            return _cut(out)
        si = min(range(len(searches)), key=lambda x: searches[x].bound_q())
        s = searches[si]
        rows = s.advance()
        batch_s = time.perf_counter() - now
        extra = tiebreak(si)
        for n in range(len(rows)):
            item = (int(rows.res_q[n]), int(rows.drift_q[n]), int(rows.cost_q[n]), extra,
                    s.ids(rows, n), seq, si, n, rows)  # fmt: skip
            heapq.heappush(pool, item)
            seq += 1


def _finish(out: WalkResult, searches: list[TrimSearch]) -> WalkResult:
    out.proven = all(s.complete and s.bounds_held for s in searches)
    return out


def _cut(out: WalkResult) -> WalkResult:
    out.proven = False
    out.cut = True
    return out
