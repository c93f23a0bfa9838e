"""Exact enumeration engine: vectorised numpy with bound-based pruning.

The search space is every (U1, R1, R2, R3, C1). With k = R1/R2 fixed, the full model's
period rises with P = k·R3·C1 whatever R3 is (``search.bounds``), so a pair's rows lie in a
window of ln(R3·C1), which ``search.products`` answers from the sorted ln R per capacitor
value (no table of every R3·C1), and the engine walks:

1. pairs: for each op amp, the (R1, R2) whose ratio lies in the op amp's ``k_range`` (binary
   search in the sorted ln R). For each pair, ``bounds.window`` gives the P range outside
   which no R3 lets the period into the band, and the amplitude and timing-share bounds over
   that range drop the pairs that cannot meet the amplitude band or the timing limit (under
   a worst-case guarantee ``search.guarantee.pair_limits`` narrows the window and drops more
   pairs first). Each pair gets a lower bound on the score of any row through it: its exact
   terms (U1, R1, R2), the lower bounds of the amplitude and timing-share terms, and the
   smallest R3 + C1 term (an R3 that repeats R1 or R2 credited).
   The pairs are built on demand (``search.pairs``): only those whose part terms alone
   leave them a chance under the level the walk needs, in chunks, the deadline checked
   between chunks, so a big catalog never holds its R² pairs; where the search form
   narrows the square levels by pair (``SearchForm.pair_levels``), each pair's window and
   bounds, and the rows' run-time guard, take the pair's own loop;
2. windows: the frequency term a pair can still afford under a score bound θ caps |e_f|,
   which narrows the period band and so the P window (binary searches again);
3. rows: the rows of a few most promising pairs give θ (the ``top``-th score found); then
   every pair whose bound is within θ has its window opened, and the rows whose part terms
   leave them a chance are opened (``evaluated`` counts them). Opened rows are scored and
   checked by the full model (``search.rows.evaluate``) in order of their lower bound
   (pair base + (R3, C1) term - credit), and the best ``top`` are kept; scoring stops once
   the next lower bound exceeds the ``top``-th score, since no row from there on can enter.

A pair or a row left out, or left unscored, scores above θ or cannot meet the spec, so the
answer is exact under the full model. The deadline is checked between chunks of pairs built,
of rows listed and of rows scored.
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.search.bounds import window
from tristock.search.model import SearchModel
from tristock.search.pairfigures import PERIOD_EDGE
from tristock.search.pairs import Pairs, PairSource
from tristock.search.products import ProductIndex, product_index
from tristock.search.rows import Rows, best, coupled_ok, empty_rows, evaluate

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


@dataclass
class EngineResult:
    """Best rows in rank order. ``evaluated`` counts the rows opened (in a pair's window and
    not ruled out by their part terms): each was either scored by the full model or shown by
    its lower bound to rank below the ``top`` kept; ``scored`` counts the first kind."""

    rows: Rows
    proven_optimal: bool
    evaluated: int
    elapsed_s: float
    scored: int = 0


def _period_band(
    model: SearchModel, e_lo: NDArray[np.float64], e_hi: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Periods (s) of the frequency errors e_lo..e_hi: T = T_target·e^(-e), a little wider."""
    t_target = 1.0 / model.spec.target.target_hz
    return t_target * np.exp(-e_hi) * (1 - PERIOD_EDGE), t_target * np.exp(-e_lo) * (
        1 + PERIOD_EDGE
    )


@dataclass
class Opened:
    """Rows opened and not yet scored: (U1, R1, R2, R3, C1) and a lower bound of each
    row's primary score (its pair's ``base``, its (R3, C1) term, less the shared-line
    credit an R3 that repeats R1 or R2 could earn)."""

    u: I64
    i1: I64
    i2: I64
    i3: I64
    j: I64
    least: I64
    levels: F64  # the pair's level intervals, (n, 4), or (n, 0) (``Pairs.levels``)

    def __len__(self) -> int:
        return len(self.u)

    def take(self, sel: I64) -> Opened:
        return Opened(*(getattr(self, n)[sel] for n in self.__dataclass_fields__))


def _windows(
    model: SearchModel, pairs: Pairs, theta: int | None
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Each pair's range of ln(R3·C1) for the rows that can still score ``theta`` or better
    (the whole frequency band when ``theta`` is None), widened by 1e-12."""
    fa, fb = model.band_f
    if theta is None:
        e_max = np.full(len(pairs.u), np.inf)
    else:
        e_max = model.frequency_budget(theta - pairs.bound)
    e_hi = np.minimum(fb, e_max)
    e_lo = np.maximum(fa, -e_max)
    t_min, t_max = _period_band(model, e_lo, e_hi)
    w = window(pairs.loops(model), pairs.k, t_min, t_max)
    ln_k = np.log(pairs.k)
    with np.errstate(divide="ignore"):
        ln_lo = np.log(np.maximum(w.lo, pairs.p_min)) - ln_k
        ln_hi = np.log(np.minimum(w.hi, pairs.p_max)) - ln_k
    return ln_lo - 1e-12, ln_hi + 1e-12


def _open(
    model: SearchModel, index: ProductIndex, pairs: Pairs, theta: int | None
) -> Iterator[Opened]:
    """The rows of the pairs' windows that can still score ``theta`` or better, in batches
    of about ``OPEN_BATCH`` rows (pairs kept whole), the windows of ``WINDOW_CHUNK`` pairs
    at a time (the consumer checks the deadline between batches)."""
    if len(pairs.u) == 0 or index.empty:
        return
    credit = model.shared_line_credit()
    for first in range(0, len(pairs.u), WINDOW_CHUNK):
        some = pairs.take(np.arange(first, min(first + WINDOW_CHUNK, len(pairs.u))))
        ln_lo, ln_hi = _windows(model, some, theta)
        budget = None if theta is None else theta - some.base + credit
        ends = np.cumsum(index.sizes(ln_lo, ln_hi))
        start = 0
        while start < len(some.u):
            base = ends[start - 1] if start else 0
            stop = max(int(np.searchsorted(ends, base + OPEN_BATCH, "right")), start + 1)
            part = slice(start, stop)
            got = index.choices(ln_lo[part], ln_hi[part], None if budget is None else budget[part])
            which = got.which + start
            yield Opened(
                some.u[which],
                some.i1[which],
                some.i2[which],
                got.i3,
                got.j,
                some.base[which] + got.term - credit,
                some.levels[which],
            )
            start = stop


@dataclass
class Scoring:
    """The best rows so far, with the counts and whether the deadline cut the work."""

    found: Rows
    top: int
    deadline: float
    coupled: bool
    evaluated: int = 0
    scored: int = 0
    cut: bool = False

    @property
    def theta(self) -> float:
        """The ``top``-th best primary score so far (inf while fewer are found)."""
        return float(self.found.primary[-1]) if len(self.found) >= self.top else math.inf

    def score(self, model: SearchModel, rows: Opened) -> None:
        """Add opened rows: score them with the full model in order of their lower bound
        until the next bound exceeds the ``top``-th score (those rows cannot enter the
        top), in batches between deadline checks."""
        self.evaluated += len(rows)
        if self.theta < math.inf:
            rows = rows.take(np.flatnonzero(rows.least <= self.theta))
        if self.coupled:  # rows short of stock or over the cost cap: rejected unscored
            rows = rows.take(
                np.flatnonzero(coupled_ok(model, rows.u, rows.i1, rows.i2, rows.i3, rows.j))
            )
        for part in _rising(rows.least):
            if not self._score_sorted(model, rows.take(part)):
                return

    def _score_sorted(self, model: SearchModel, rows: Opened) -> bool:
        """``score`` over rows sorted by their bound; False once the rest cannot enter the
        top or the deadline has come."""
        start, size = 0, FIRST_SCORE_BATCH
        while start < len(rows):
            if rows.least[start] > self.theta:
                return False
            if time.perf_counter() > self.deadline:
                self.cut = True
                return False
            batch = rows.take(np.arange(start, min(start + size, len(rows))))
            got = evaluate(
                model,
                batch.u,
                batch.i1,
                batch.i2,
                batch.i3,
                batch.j,
                coupled=self.coupled,
                levels=batch.levels if batch.levels.shape[1] else None,
            )
            self.scored += len(batch)
            if self.theta < math.inf:  # a row scoring above the top-th cannot enter
                got = got.take(np.flatnonzero(got.primary <= self.theta))
            self.found = best(model, Rows.concat([self.found, got]), self.top)
            start += len(batch)
            size = min(2 * size, MAX_SCORE_BATCH)
        return True


def _rising(least: I64) -> Iterator[I64]:
    """The indices of ``least`` in rising order (ties in any order), as two sorted parts:
    the ``SORTED_FIRST`` smallest, then the rest, sorted only if the walk gets there."""
    if len(least) <= SORTED_FIRST:
        yield np.argsort(least)
        return
    split = np.argpartition(least, SORTED_FIRST)
    head, tail = split[:SORTED_FIRST], split[SORTED_FIRST:]
    yield head[np.argsort(least[head])]
    yield tail[np.argsort(least[tail])]


#: Rows listed at once from the windows (memory: about 50 bytes each).
OPEN_BATCH = 1 << 17
#: Pairs whose windows (root searches) are computed at once, between deadline checks.
WINDOW_CHUNK = 512
#: Rows scored by the full model in the first batch; later batches double up to the most.
FIRST_SCORE_BATCH = 1024
MAX_SCORE_BATCH = 1 << 13
#: Rows sorted by their bound first; the others only when the walk reaches them.
SORTED_FIRST = 1 << 16
#: Each new level of part bounds lies this many times further above the lowest one.
LEVEL_GROWTH = 1.5
#: Pairs whose windows are opened together once the score bound is known.
PAIR_CHUNK = 4096


def _seed_pairs(source: PairSource, level: float, m: int) -> tuple[Pairs, float]:
    """The pairs with bound <= a level holding more than ``m`` of them (or every pair), in
    opening order, and that level."""
    while True:
        if source.everything or level >= source.highest:
            return source.complete(math.inf), math.inf
        pairs = source.complete(level)
        if len(pairs) > m or source.cut:
            return pairs, level
        level = source.lowest + LEVEL_GROWTH * (level - source.lowest)


def _open_all(
    model: SearchModel, index: ProductIndex, pairs: Pairs, theta: int | None, scoring: Scoring
) -> None:
    """Open the pairs' rows and score them, until done or the deadline."""
    for rows in _open(model, index, pairs, theta):
        if time.perf_counter() > scoring.deadline:
            scoring.cut = True
        else:
            scoring.score(model, rows)
        if scoring.cut:
            return


def enumerate_top(
    model: SearchModel, top: int, time_limit_s: float, *, coupled: bool = True
) -> EngineResult:
    """The ``top`` best combinations, exact under the full model.

    ``coupled=False`` ignores stock shared between positions and the cost cap (the CP-SAT
    engine lists its table this way and enforces those itself). The pairs come from a
    ``PairSource`` (``search.pairs``): only those that can still beat the current score bound
    are built, so the pairs opened, and the rows opened, are those of the order (bound, U1,
    R1, R2) over every pair. The deadline is checked between chunks of pairs, of rows
    listed and of rows scored; a deadline that stops the work leaves the answer unproven.
    """
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    index = product_index(model)
    source = PairSource(model, index, deadline)
    level = source.first_level()
    scoring = Scoring(empty_rows(), top, deadline, coupled)
    evaluated = scored = 0
    m = max(16, 2 * top)
    while True:
        pairs, level = _seed_pairs(source, level, m)
        if source.cut:
            break
        # Each round scores the first m pairs afresh (the rows of a round are a prefix).
        scoring = Scoring(empty_rows(), top, deadline, coupled)
        _open_all(model, index, pairs.take(np.arange(min(m, len(pairs)))), None, scoring)
        evaluated, scored = evaluated + scoring.evaluated, scored + scoring.scored
        if scoring.cut or len(scoring.found) >= top or (level == math.inf and m >= len(pairs)):
            break
        if time.perf_counter() > deadline:
            scoring.cut = True
            break
        m = m * 8
    proven = not (source.cut or scoring.cut)
    if len(scoring.found) >= top and proven:
        theta = int(scoring.found.primary[-1])
        todo = source.complete(theta)
        todo = todo.take(todo.bound <= theta)
        proven = not source.cut
        scoring.evaluated = scoring.scored = 0
        for start in range(0, len(todo) if proven else 0, PAIR_CHUNK):
            if time.perf_counter() > deadline:
                proven = False
                break
            sel = np.arange(start, min(start + PAIR_CHUNK, len(todo)))
            _open_all(model, index, todo.take(sel), theta, scoring)
            if scoring.cut:
                proven = False
                break
            theta = int(scoring.found.primary[-1])
        evaluated, scored = evaluated + scoring.evaluated, scored + scoring.scored
    proven &= model.form.bounds_proven and not model.bounds_violated
    return EngineResult(scoring.found, proven, evaluated, time.perf_counter() - t0, scored)
