"""Exact enumeration engine: vectorised numpy with bound-based pruning.

The search space is every (U1, R1, R2, R3, C1). With k = R1/R2 fixed, the full model's
period rises with P = k·R3·C1 whatever R3 is (``search.bounds``), so the engine sorts every
ln(R3·C1) once (the product table) and walks:

1. pairs: for each op amp, the (R1, R2) whose ratio lies in the op amp's ``k_range`` (binary
   search in the sorted ln R). For each pair, ``bounds.window`` gives the P range outside
   which no R3 lets the period into the band, and the amplitude and timing-share bounds over
   that range drop the pairs that cannot meet the amplitude band or the timing limit (under
   a worst-case guarantee ``search.guarantee.pair_limits`` narrows the window and drops more
   pairs first). Each pair gets a lower bound on the score of any row through it: its exact
   terms (U1, R1, R2), the lower bounds of the amplitude and timing-share terms, and the
   smallest R3 + C1 term in the product table (an R3 that repeats R1 or R2 credited).
   The pairs are built on demand (``search.pairs``): only those whose part terms alone
   leave them a chance under the level the walk needs, in chunks, the deadline checked
   between chunks, so a big catalog never holds its R² pairs;
2. windows: the frequency term a pair can still afford under a score bound θ caps |e_f|,
   which narrows the period band and so the P window, one contiguous range of the product
   table (binary search again);
3. rows: the rows of a few most promising pairs give θ (the ``top``-th score found); then
   every pair whose bound is within θ has its window opened, every row is scored and checked
   by the full model (``search.rows.evaluate``), and the best ``top`` are kept.

A pair or a row left out scores above θ or cannot meet the spec, so the answer is exact under
the full model.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.search.bounds import window
from tristock.search.model import SearchModel
from tristock.search.pairs import PERIOD_EDGE, Pairs, PairSource, Products, index_ranges
from tristock.search.rows import Rows, best, empty_rows, evaluate


@dataclass
class EngineResult:
    """Best rows in rank order; ``evaluated`` counts the rows scored."""

    rows: Rows
    proven_optimal: bool
    evaluated: int
    elapsed_s: float


def product_table(model: SearchModel) -> Products:
    """Every eligible (R3, C1) with its score term, sorted by ln(R3·C1)."""
    res, cap = model.resistors, model.capacitors
    i3 = np.repeat(np.arange(len(res), dtype=np.int64), len(cap))
    j = np.tile(np.arange(len(cap), dtype=np.int64), len(res))
    keep = model.allows("R3", len(res))[i3] & model.allows("C1", len(cap))[j]
    i3, j = i3[keep], j[keep]
    ln = res.ln_value[i3] + cap.ln_value[j]
    term = model.resistor_term(i3) + model.capacitor_term(j)
    order = np.argsort(ln, kind="stable")
    return Products(ln[order], i3[order], j[order], term[order])


def _period_band(
    model: SearchModel, e_lo: NDArray[np.float64], e_hi: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Periods (s) of the frequency errors e_lo..e_hi: T = T_target·e^(-e), a little wider."""
    t_target = 1.0 / model.spec.target.target_hz
    return t_target * np.exp(-e_hi) * (1 - PERIOD_EDGE), t_target * np.exp(-e_lo) * (
        1 + PERIOD_EDGE
    )


def _open(
    model: SearchModel, products: Products, pairs: Pairs, theta: int | None, coupled: bool
) -> tuple[Rows, int]:
    """Rows of the pairs' windows that can still score ``theta`` or better, and how many
    rows were scored."""
    if len(pairs.u) == 0:
        return empty_rows(), 0
    fa, fb = model.band_f
    credit = model.shared_line_credit()
    if theta is None:
        e_max = np.full(len(pairs.u), np.inf)
    else:
        e_max = model.frequency_budget(theta - pairs.bound)
    e_hi = np.minimum(fb, e_max)
    e_lo = np.maximum(fa, -e_max)
    t_min, t_max = _period_band(model, e_lo, e_hi)
    w = window(model.loops(pairs.u), pairs.k, t_min, t_max)
    ln_k = np.log(pairs.k)
    with np.errstate(divide="ignore"):
        ln_lo = np.log(np.maximum(w.lo, pairs.p_min)) - ln_k
        ln_hi = np.log(np.minimum(w.hi, pairs.p_max)) - ln_k
    lo = np.searchsorted(products.ln, ln_lo - 1e-12, side="left")
    hi = np.searchsorted(products.ln, ln_hi + 1e-12, side="right")
    which, idx = index_ranges(lo, hi)
    if theta is not None:
        keep = pairs.base[which] + products.term[idx] - credit <= theta
        which, idx = which[keep], idx[keep]
    rows = evaluate(
        model,
        pairs.u[which],
        pairs.i1[which],
        pairs.i2[which],
        products.i3[idx],
        products.j[idx],
        coupled=coupled,
    )
    return rows, len(which)


#: Each new level of part bounds lies this many times further above the lowest one.
LEVEL_GROWTH = 1.5


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


def enumerate_top(
    model: SearchModel, top: int, time_limit_s: float, *, coupled: bool = True
) -> EngineResult:
    """The ``top`` best combinations, exact under the full model.

    ``coupled=False`` ignores stock shared between positions and the cost cap (the CP-SAT
    engine lists its table this way and enforces those itself). The pairs come from a
    ``PairSource`` (``search.pairs``): only those that can still beat the current score bound
    are built, so the pairs opened, and the rows scored, are those of the order (bound, U1,
    R1, R2) over every pair. A deadline that stops the building leaves the answer unproven.
    """
    t0 = time.perf_counter()
    products = product_table(model)
    source = PairSource(model, products, t0 + time_limit_s)
    level = source.first_level()
    found = empty_rows()
    evaluated = 0
    proven = True
    m = max(16, 2 * top)
    while True:
        pairs, level = _seed_pairs(source, level, m)
        if source.cut:
            proven = False
            break
        rows, scored = _open(
            model, products, pairs.take(np.arange(min(m, len(pairs)))), None, coupled
        )
        evaluated += scored
        found = best(model, rows, top)
        if len(found) >= top or (level == math.inf and m >= len(pairs)):
            break
        if time.perf_counter() - t0 > time_limit_s:
            proven = False
            break
        m = m * 8
    if len(found) >= top and proven:
        theta = int(found.primary[-1])
        todo = source.complete(theta)
        todo = todo.take(todo.bound <= theta)
        proven = not source.cut
        chunk = 4096
        for start in range(0, len(todo) if proven else 0, chunk):
            if time.perf_counter() - t0 > time_limit_s:
                proven = False
                break
            sel = np.arange(start, min(start + chunk, len(todo)))
            rows, scored = _open(model, products, todo.take(sel), theta, coupled)
            evaluated += scored
            found = best(model, Rows.concat([found, rows]), top)
            theta = int(found.primary[-1])
    proven &= model.form.bounds_proven and not model.bounds_violated
    return EngineResult(found, proven, evaluated, time.perf_counter() - t0)
