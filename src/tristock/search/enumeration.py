"""Exact enumeration engine: vectorised numpy with bound-based pruning.

The search space is every (U1, R1, R2, R3, C1). The period depends on R3 and C1 only through
their product, so the engine sorts every ln(R3·C1) once (the product table) and walks:

1. pairs: for each op amp, the (R1, R2) whose ratio puts the amplitude in its band (binary
   search in the sorted ln R). Each pair gets a lower bound on the score of any row through
   it: its own exact terms (U1, R1, R2, amplitude error) plus the smallest R3 + C1 term in the
   product table (an R3 that repeats R1 or R2 credited);
2. windows: the frequency term a pair can still afford under a score bound θ caps |e_f|, and
   e_f = ln((X + d)/(k·R3·C1 + d)) turns that cap into one contiguous window of the product
   table (binary search again);
3. rows: the rows of a few most promising pairs give θ (the ``top``-th score found); then
   every pair whose bound is within θ has its window opened, every row is scored and checked
   against all constraints, and the best ``top`` are kept.

A pair or a row left out scores above θ, so the answer is exact within the search model.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.search.model import (
    SCORE_RESOLUTION,
    OpAmpTerms,
    Rows,
    SearchModel,
    best,
    evaluate,
    pair_spread,
)


@dataclass
class EngineResult:
    """Best rows in rank order; ``evaluated`` counts the rows scored."""

    rows: Rows
    proven_optimal: bool
    evaluated: int
    elapsed_s: float


@dataclass
class _Products:
    """Every (R3, C1) sorted by ln(R3·C1), with its score term."""

    ln: NDArray[np.float64]
    i3: NDArray[np.int64]
    j: NDArray[np.int64]
    term: NDArray[np.int64]


@dataclass
class _Pairs:
    u: NDArray[np.int64]
    i1: NDArray[np.int64]
    i2: NDArray[np.int64]
    base: NDArray[np.int64]  # exact score terms of U1, R1, R2 and the amplitude error
    bound: NDArray[np.int64]  # base + the best (R3, C1) term
    margin_lo: NDArray[np.float64]  # e_f must stay this far above the band's floor ...
    margin_hi: NDArray[np.float64]  # ... and this far below its ceiling (worst case)

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> _Pairs:
        return _Pairs(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})


def _ranges(
    lo: NDArray[np.int64], hi: NDArray[np.int64]
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Flatten index ranges [lo[n], hi[n]): (n for each element, the element's index)."""
    counts = np.maximum(hi - lo, 0)
    which = np.repeat(np.arange(len(counts), dtype=np.int64), counts)
    offsets = np.repeat(np.cumsum(counts) - counts, counts)
    return which, (np.repeat(lo, counts) + np.arange(len(which)) - offsets).astype(np.int64)


def _products(model: SearchModel) -> _Products:
    res, cap = model.resistors, model.capacitors
    i3 = np.repeat(np.arange(len(res), dtype=np.int64), len(cap))
    j = np.tile(np.arange(len(cap), dtype=np.int64), len(res))
    keep = model.allows("R3", len(res))[i3] & model.allows("C1", len(cap))[j]
    i3, j = i3[keep], j[keep]
    ln = res.ln_value[i3] + cap.ln_value[j]
    term = model.resistor_term(i3) + model.capacitor_term(j)
    order = np.argsort(ln, kind="stable")
    return _Products(ln[order], i3[order], j[order], term[order])


def _pairs(model: SearchModel, products: _Products) -> _Pairs:
    """(R1, R2) pairs with ln(R1/R2) - ln k_target inside the amplitude band, per op amp."""
    ln_r = model.resistors.ln_value
    aa, ab = model.band_a
    r_term = model.resistor_term(np.arange(len(ln_r)))
    credit = model.shared_line_credit()
    floor = int(products.term.min()) - credit if len(products.term) else 0
    parts: list[_Pairs] = []
    use_u1 = model.allows("U1", len(model.opamps))
    use_r1 = model.allows("R1", len(ln_r))
    use_r2 = model.allows("R2", len(ln_r))
    for o in model.opamps:
        if not use_u1[o.index]:
            continue
        lo = np.searchsorted(ln_r, ln_r - o.ln_k_target - ab - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r - o.ln_k_target - aa + 1e-12, side="right")
        i1, i2 = _ranges(lo, hi)
        keep = use_r1[i1] & use_r2[i2]
        i1, i2 = i1[keep], i2[keep]
        e_a = ln_r[i1] - ln_r[i2] - o.ln_k_target
        base = (
            model.opamp_term(o)
            + r_term[i1]
            + r_term[i2]
            - credit * (i1 == i2)
            + model.amplitude_term(e_a)
        )
        u = np.full(len(i1), o.index, dtype=np.int64)
        margin_lo = margin_hi = np.zeros(len(i1))
        keep = np.ones(len(i1), dtype=bool)
        guarantee = model.spec.limits.guarantee
        if guarantee == "worst_case":
            margin_lo, margin_hi, dn_a, up_a = pair_spread(model, u, i1, i2)
            keep = (e_a + up_a <= ab) & (e_a - dn_a >= aa)
        y_bound = _yield_bound(model, o, i1, i2, e_a)
        if guarantee == "yield":
            keep &= (
                1.0 - y_bound * SCORE_RESOLUTION >= model.spec.limits.min_yield - SCORE_RESOLUTION
            )
        bound = y_bound if model.mode == "yield" else base + floor
        pairs = _Pairs(u, i1, i2, base, bound, margin_lo, margin_hi)
        parts.append(pairs.take(keep))
    if not parts:
        empty = np.zeros(0, dtype=np.int64)
        none = np.zeros(0)
        return _Pairs(empty, empty, empty, empty, empty, none, none)
    return _Pairs(
        **{n: np.concatenate([getattr(p, n) for p in parts]) for n in _Pairs.__dataclass_fields__}
    )


def _yield_bound(
    model: SearchModel,
    o: OpAmpTerms,
    i1: NDArray[np.int64],
    i2: NDArray[np.int64],
    e_a: NDArray[np.float64],
) -> NDArray[np.int64]:
    """Lower bound on 1 - Y for any row through the pairs.

    Y = Y_f·Y_a falls as a variance grows (for errors inside the band) and Y_f is largest at
    the band's centre, so leaving out every variance term that R3, C1, rails and temperature
    add beyond the op amp's own spread, and putting e_f at the centre, bounds Y from above.
    """
    res, cap = model.resistors, model.capacitors
    v12 = model.variance(res.tol[i1]) + model.variance(res.tol[i2])
    has_r3_c1 = len(res) > 0 and len(cap) > 0  # an empty table has no finest part
    v3c = float(model.variance(res.tol.min()) + model.variance(cap.tol.min())) if has_r3_c1 else 0
    fa, fb = model.band_f
    centre = np.full(len(i1), 0.5 * (fa + fb))
    var_f = o.gain**2 * (v12 + v3c) + sum(o.rail_f) ** 2 / 12
    var_a = v12 + sum(o.rail_a) ** 2 / 12
    y = model.yield_estimate(centre, e_a, var_f, var_a)
    return np.asarray(np.rint((1.0 - y) / SCORE_RESOLUTION), dtype=np.int64)


def _open(
    model: SearchModel, products: _Products, pairs: _Pairs, theta: int | None, coupled: bool
) -> tuple[Rows, int]:
    """Rows of the pairs' windows that can still score ``theta`` or better, and how many
    rows were scored."""
    if len(pairs.u) == 0:
        return evaluate(model, *(np.zeros(0, dtype=np.int64) for _ in range(5))), 0
    fa, fb = model.band_f
    x = np.array([o.x for o in model.opamps])[pairs.u]
    d = np.array([o.d for o in model.opamps])[pairs.u]
    credit = model.shared_line_credit()
    if theta is None:
        e_max = np.full(len(pairs.u), np.inf)
    else:
        e_max = model.frequency_budget(theta - pairs.bound)
    e_hi = np.minimum(fb - pairs.margin_hi, e_max)
    e_lo = np.maximum(fa + pairs.margin_lo, -e_max)
    ln_k = model.resistors.ln_value[pairs.i1] - model.resistors.ln_value[pairs.i2]
    p_small = (x + d) * np.exp(-e_hi) - d
    p_large = (x + d) * np.exp(-e_lo) - d
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_lo = np.where(p_small > 0, np.log(np.maximum(p_small, 1e-300)), -np.inf) - ln_k
        ln_hi = np.where(p_large > 0, np.log(np.maximum(p_large, 1e-300)), -np.inf) - ln_k
    lo = np.searchsorted(products.ln, ln_lo - 1e-12, side="left")
    hi = np.searchsorted(products.ln, ln_hi + 1e-12, side="right")
    which, idx = _ranges(lo, hi)
    if theta is not None and model.mode != "yield":
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


def enumerate_top(
    model: SearchModel, top: int, time_limit_s: float, *, coupled: bool = True
) -> EngineResult:
    """The ``top`` best combinations, exact within the search model.

    ``coupled=False`` ignores stock shared between positions and the cost cap (the CP-SAT
    engine lists its table this way and enforces those itself).

    In the yield mode the pair bound is an upper bound on the yield estimate (see
    ``_yield_bound``) and windows are not narrowed.
    """
    t0 = time.perf_counter()
    products = _products(model)
    pairs = _pairs(model, products)
    order = np.argsort(pairs.bound, kind="stable")
    pairs = pairs.take(order)
    evaluated = 0
    proven = True
    m = max(16, 2 * top)
    while True:
        rows, scored = _open(
            model, products, pairs.take(np.arange(min(m, len(pairs.u)))), None, coupled
        )
        evaluated += scored
        found = best(model, rows, top)
        if len(found) >= top or m >= len(pairs.u):
            break
        if time.perf_counter() - t0 > time_limit_s:
            proven = False
            break
        m = m * 8
    if len(found) >= top and proven:
        theta = int(found.primary[-1])
        todo = pairs.take(pairs.bound <= theta)
        chunk = 4096
        for start in range(0, len(todo.u), chunk):
            if time.perf_counter() - t0 > time_limit_s:
                proven = False
                break
            sel = np.arange(start, min(start + chunk, len(todo.u)))
            rows, scored = _open(model, products, todo.take(sel), theta, coupled)
            evaluated += scored
            found = best(model, Rows.concat([found, rows]), top)
            theta = int(found.primary[-1])
    return EngineResult(found, proven, evaluated, time.perf_counter() - t0)
