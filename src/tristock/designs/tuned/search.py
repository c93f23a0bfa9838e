"""The exact walk: tuned designs in rank order, each decided by the full model's verdict.

Rank key of a design with n ranges: (cost, evenness, stock codes), cost in micro-units,
evenness the largest nominal excess overlap of neighbouring ranges (``chains.evenness``),
stock codes in the order U1, R1, R2, R3, R4, RV1, C1..Cn. With ``ranges = "auto"`` the count
is the fewest any accepted design has; every answer has that many.

For one count n the walk raises a cost threshold θ in steps. At each step it lists every
candidate with cost in (θ_prev, θ]: every combination whose cost bound is within θ
(``cores``), its ranges with every capacitor (``ranges``), and every chain of n that covers the
span with the optimistic ends and fits the window (``chains``). A design not listed either
costs more than θ or fails a condition that every accepted design meets. The window's
candidates are sorted by the rank key and each is decided by the verdict (``coverage``:
guaranteed ends over the spread box, the amplitude guarantee). The walk stops when ``top``
designs are accepted: every design not yet decided costs more than θ, so ranks after them.
When every design with n ranges has been listed the count is exhausted: with answers found
the ranking is settled with fewer than ``top``; without, "auto" goes on to n + 1.

A time limit that cuts the walk returns what was accepted, marked unproven.
"""

from __future__ import annotations

import heapq
import itertools
import time
from collections.abc import Callable, Hashable, Iterator
from dataclasses import dataclass, field
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from tristock.designs.pacing import step_size
from tristock.designs.tuned.chains import (
    INF,
    Changes,
    Ranges,
    completion,
    enumerate_chains,
    evenness,
    least_cost,
    steps,
)
from tristock.designs.tuned.cores import Cores, build_cores, tighten
from tristock.designs.tuned.keys import TimeUp
from tristock.designs.tuned.model import MAX_RANGES, TunedModel
from tristock.designs.tuned.network import Shared
from tristock.designs.tuned.ranges import RangeData, evaluate_ranges

I64 = NDArray[np.int64]
Row = tuple[int, int, int, int, int, int]
#: A combination waiting: (cost bound, row, shared cost, and once ``tighten`` gave the bound,
#: which capacitors' ranges can count at all; None before).
Waiting = tuple[int, Row, int, NDArray[np.bool_] | None]
#: Combinations evaluated together (each with every capacitor).
BATCH = 128
#: Combinations tightened together: the rough ones among this many first waiting.
TIGHTEN = 1024
#: Candidates decided together at most (their ranges' boxes searched in one call).
DECIDE_BATCH = 5
FIRST_STEP = 4000  # micro-units: the first listing threshold above the least bound
GROWTH = 1.25  # each later threshold: the least bound + this times the previous distance


@dataclass
class Found:
    """One candidate design: its combination, chain (capacitor indices, C1 first), cost
    (micro-units), evenness (1e-6) and rank key; ``data`` holds its combination's ranges."""

    row: Row
    chain: tuple[int, ...]
    cost: int
    evenness: int
    key: tuple[object, ...]
    data: RangeData
    index: int  # the combination's row in ``data``
    model: TunedModel  # the model its indices point into


@dataclass
class Walk:
    """What the walk found: accepted designs in rank order, the count n, whether the order
    is proven, and counters."""

    accepted: list[tuple[Found, list[object]]] = field(default_factory=list)
    ranges: int = 0
    proven: bool = True
    evaluated: int = 0
    combinations: int = 0
    dropped: int = 0
    candidates: int = 0


def certified(f: Found) -> bool:
    """Whether every range of the candidate had its dial decided at every wiper position (a
    board whose comparator edge is not claimed is decided at grid points only, and an
    answer with such a range is not proven)."""
    return bool(all(f.data.certified[f.index, j] for j in f.chain))


def ids_of(model: TunedModel, row: Row, chain: tuple[int, ...]) -> tuple[str, ...]:
    u, i1, i2, i3, i4, v = row
    res = model.resistors.parts
    caps = model.capacitors.parts
    return (
        model.opamps[u].part.id,
        res[i1].id,
        res[i2].id,
        res[i3].id,
        res[i4].id if i4 >= 0 else "",
        model.pots[v].id,
        *(caps[j].id for j in chain),
    )


class Lister:
    """Candidates with n ranges in exact rank order (module docstring).

    Every design not yet listed comes from a combination still waiting (cost at least its
    bound), a chain of an evaluated combination above the listing threshold θ, or a
    combination above θ: so a listed candidate whose cost is below both the least waiting
    bound and θ + 1 ranks before all of them and is released."""

    def __init__(
        self,
        model: TunedModel,
        cores: Cores,
        n: int,
        walk: Walk,
        deadline: float,
        changes: Changes | None = None,
    ):
        self.changes = changes
        self.model = model
        self.cores = cores
        self.n = n
        self.walk = walk
        self.deadline = deadline
        self.end = ceiling(model, cores, n)
        bound = cores.bound(n)
        finite = bound[bound < INF]
        self.low = int(finite.min()) if len(finite) else INF
        self.theta = -1
        self.waiting: list[Waiting] = []  # a heap
        self.seen: set[Row] = set()
        self.evaluated: dict[Row, tuple[RangeData, int, int, int]] = {}  # data, at, least, cost
        self.heap: list[tuple[tuple[object, ...], int, Found]] = []
        self.count = 0
        self.cut = False

    def __iter__(self) -> Iterator[Found]:
        while True:
            if time.perf_counter() > self.deadline:
                self.cut = True
                return
            waiting = self.waiting[0][0] if self.waiting else INF
            limit = min(waiting, self.theta + 1)
            if self.heap and int(self.heap[0][2].cost) < limit:
                yield heapq.heappop(self.heap)[2]
                continue
            if self.waiting and waiting <= self.theta:
                self._evaluate_waiting()
                continue
            if self.theta >= self.end or self.low >= INF:
                while self.heap:
                    yield heapq.heappop(self.heap)[2]
                return
            try:
                self._raise()
            except TimeUp:
                self.cut = True
                return

    def _raise(self) -> None:
        """Raise θ: new combinations wait, evaluated ones list their chains up to θ."""
        old = self.theta
        step = FIRST_STEP if old < 0 else int((old - self.low) * GROWTH) + 1
        new = self.low + step
        new = min(max(new, old + 1), self.end)
        sh, bound = self.cores.select(self.model, self.n, new, self.deadline)
        rows = zip(*(x.tolist() for x in (sh.u, sh.i1, sh.i2, sh.i3, sh.i4, sh.v)), strict=True)
        for r, b, c in zip(rows, bound.tolist(), sh.cost.tolist(), strict=True):
            if r not in self.seen:
                self.seen.add(r)
                self.waiting.append((b, r, c, None))
        heapq.heapify(self.waiting)
        self.theta = new
        for r, (data, at, least, cost) in self.evaluated.items():
            if least + cost <= new:
                self._list(r, data, at, cost, old, new)

    def _evaluate_waiting(self) -> None:
        """Evaluate the waiting combinations with the least bounds (a batch), once each has
        its bound tightened (``tighten``; a tightened one may move back)."""
        front = self._front(TIGHTEN)
        if any(w[3] is None for w in front[:BATCH]):
            self._tighten(front)
            return
        for w in front[BATCH:]:
            heapq.heappush(self.waiting, w)
        batch = front[:BATCH]
        model = self.model
        assert model.spec.tuning is not None
        tu = model.spec.tuning
        rows = [r for _, r, _, _ in batch]
        sh = _shared(batch)
        data = evaluate_ranges(model, sh, np.array([w[3] for w in batch]))
        self.walk.evaluated += int(data.ranges.usable.size)
        self.walk.combinations += len(sh)
        allowed = steps(data.ranges, tu.overlap_pct / 100)
        comp = completion(data.ranges, allowed, self.n, tu.high_hz)
        least = least_cost(data.ranges, comp, self.n, tu.low_hz)
        for i, r in enumerate(rows):
            if least[i] >= INF:
                continue
            cost = int(sh.cost[i])
            self.evaluated[r] = (data, i, int(least[i]), cost)
            if int(least[i]) + cost <= self.theta:
                self._list(r, data, i, cost, -1, self.theta)

    def _tighten(self, front: list[Waiting]) -> None:
        """Tighten the bounds of these combinations (those not yet) and put them back."""
        rough = [w for w in front if w[3] is None]
        tight, ranges = tighten(self.model, _shared(rough), self.n)
        for w, t, usable in zip(rough, tight.tolist(), ranges, strict=True):
            if t < INF:
                heapq.heappush(self.waiting, (t, w[1], w[2], usable))
        for w in front:
            if w[3] is not None:
                heapq.heappush(self.waiting, w)

    def _front(self, count: int) -> list[Waiting]:
        """Take from the heap the first ``count`` combinations with bounds within θ, in
        order. Once all of them are tightened every other one ranks after them: its bound,
        or its row when the bounds tie, is larger, and tightening only raises bounds."""
        front: list[Waiting] = []
        heap = self.waiting
        while heap and heap[0][0] <= self.theta and len(front) < count:
            front.append(heapq.heappop(heap))
        return front

    def _list(self, r: Row, data: RangeData, at: int, cost: int, lo: int, hi: int) -> None:
        """Push the chains of combination ``r`` whose total cost lies in (lo, hi]."""
        model = self.model
        assert model.spec.tuning is not None
        tu = model.spec.tuning
        overlap = tu.overlap_pct / 100
        single = _one(data.ranges, at)
        allowed = steps(single, overlap)
        comp = completion(single, allowed, self.n, tu.high_hz)
        budget = (lo - cost, hi - cost)
        for chain, c in enumerate_chains(
            single, 0, allowed, comp, self.n, tu.low_hz, budget, self.changes
        ):
            total = cost + c
            ev = evenness(data.f_top[at], data.f_bottom[at], chain, overlap)
            key = (total, ev, ids_of(model, r, chain))
            self.count += 1
            found = Found(r, chain, total, ev, key, data, at, model)
            heapq.heappush(self.heap, (key, self.count, found))
            self.walk.candidates += 1


def _shared(waiting: list[Waiting]) -> Shared:
    col = [np.array([w[1][f] for w in waiting], dtype=np.int64) for f in range(6)]
    cost = np.array([w[2] for w in waiting], dtype=np.int64)
    return Shared(u=col[0], i1=col[1], i2=col[2], i3=col[3], i4=col[4], v=col[5], cost=cost)


def _one(r: Ranges, at: int) -> Ranges:
    return Ranges(r.usable[at : at + 1], r.gl[at : at + 1], r.gh[at : at + 1], r.cost, r.value)


def ceiling(model: TunedModel, cores: Cores, n: int) -> int:
    """A cost no design with n ranges exceeds (micro-units)."""
    if len(cores) == 0:
        return 0
    pair_max = max((int(p.cost[-1]) for p in cores.pairs.values() if len(p)), default=0)
    caps = model.capacitor_cost
    cap_max = int(caps.max()) if len(caps) else 0
    top = int(cores.cost.max()) + pair_max + n * cap_max
    limit = model.spec.limits.max_cost
    return min(top, round(limit * 1e6)) if limit is not None else top


def counts(model: TunedModel, cores: Cores) -> list[int]:
    assert model.spec.tuning is not None
    want = model.spec.tuning.ranges
    if want != "auto":
        return [int(want)]
    return list(range(max(1, cores.min_fewest()), MAX_RANGES + 1))


class Verdict(Protocol):
    """The full model's verdict (``verdict.Verdicts``): ``prepare`` decides several
    candidates' ranges at once, ``__call__`` gives one candidate's (accepted, details)."""

    def prepare(self, founds: list[Found]) -> None: ...

    def __call__(self, found: Found) -> tuple[bool, list[object]]: ...


def walk(
    model: TunedModel,
    top: int,
    deadline: float,
    decide: Verdict,
    classify: Callable[[Found], Hashable] | None = None,
) -> Walk:
    """Accepted designs in rank order (module docstring). ``decide`` is the verdict. With
    ``classify`` (distinct designs) the walk goes on until the accepted designs fall into
    ``top`` classes. While k more are wanted the next k candidates are all decided (each
    adds at most one), so they are listed first and decided together, as many at a time as
    the last verdict's rate says fit before the deadline (``pacing``; none: the walk is cut)."""
    out = Walk()
    classes: set[Hashable] = set()
    cores = build_cores(model, deadline)
    if cores is None:
        out.proven = False
        return out
    for n in counts(model, cores):
        lister = Lister(model, cores, n, out, deadline)
        listed = iter(lister)
        per_candidate = 0.0  # the last verdict's time per candidate (s)
        while batch := list(itertools.islice(listed, min(top - len(classes), DECIDE_BATCH))):
            while batch and not lister.cut:
                left = deadline - time.perf_counter()
                size = step_size(left, per_candidate, len(batch), DECIDE_BATCH, 1)
                if size == 0:
                    lister.cut = True
                    break
                part, batch = batch[:size], batch[size:]
                began = time.perf_counter()
                decide.prepare(part)
                for f in part:
                    ok, detail = decide(f)
                    if ok:
                        out.accepted.append((f, detail))
                        out.proven &= certified(f)
                        classes.add(classify(f) if classify else len(out.accepted))
                        if len(classes) >= top:
                            out.ranges = n
                            return out
                    else:
                        out.dropped += 1
                per_candidate = (time.perf_counter() - began) / len(part)
            if lister.cut:
                break
        if lister.cut:
            out.proven = False
            out.ranges = n
            return out
        if out.accepted:
            out.ranges = n
            return out
    return out
