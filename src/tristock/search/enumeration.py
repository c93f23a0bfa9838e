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
   smallest R3 + C1 term in the product table (an R3 that repeats R1 or R2 credited);
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

from tristock.search.bounds import amplitude_bounds, share_p_floor, timing_share_floor, window
from tristock.search.guarantee import pair_limits
from tristock.search.model import SearchModel
from tristock.search.rows import Rows, best, empty_rows, evaluate

#: The period band is widened by this relative amount before windows are taken, so a row on
#: the band's edge whose computed period rounds differently from the bounds' stays inside.
_EDGE = 1e-12


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
    k: NDArray[np.float64]
    p_min: NDArray[np.float64]  # the nominal P a row needs: band, product table, guarantee
    p_max: NDArray[np.float64]
    base: NDArray[np.int64]  # score terms of U1, R1, R2 and floors of the amplitude and share
    bound: NDArray[np.int64]  # base + the best (R3, C1) term

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


def _period_band(
    model: SearchModel, e_lo: NDArray[np.float64], e_hi: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Periods (s) of the frequency errors e_lo..e_hi: T = T_target·e^(-e), a little wider."""
    t_target = 1.0 / model.spec.target.target_hz
    return t_target * np.exp(-e_hi) * (1 - _EDGE), t_target * np.exp(-e_lo) * (1 + _EDGE)


def _pairs(model: SearchModel, products: _Products) -> _Pairs:
    """(R1, R2) pairs that can meet the amplitude band and the timing limit, per op amp, with
    a lower bound on the score of any row through each."""
    res = model.resistors
    ln_r = res.ln_value
    spec = model.spec
    a_t = spec.triangle.amplitude_vpp
    (fa, fb), (aa, ab) = model.band_f, model.band_a
    r_term = model.resistor_term(np.arange(len(ln_r)))
    credit = model.shared_line_credit()
    floor = int(products.term.min()) - credit if len(products.term) else 0
    parts: list[_Pairs] = []
    use_u1 = model.allows("U1", len(model.opamps))
    use_r1 = model.allows("R1", len(ln_r))
    use_r2 = model.allows("R2", len(ln_r))
    if len(products.ln) == 0:
        return _no_pairs()
    t_min, t_max = _period_band(model, np.array(fa), np.array(fb))
    for o in model.opamps:
        if not use_u1[o.index]:
            continue
        k_lo, k_hi = o.k_range
        lo = np.searchsorted(ln_r, ln_r - math.log(k_hi) - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r - math.log(k_lo) + 1e-12, side="right")
        i1, i2 = _ranges(lo, hi)
        keep = use_r1[i1] & use_r2[i2]
        i1, i2 = i1[keep], i2[keep]
        k = res.value[i1] / res.value[i2]
        # Pairs of equal ratio share everything below: work on the distinct k.
        uk, inv = np.unique(k, return_inverse=True)
        loop = model.loops(np.full(len(uk), o.index, dtype=np.int64))
        w = window(loop, uk, np.full(len(uk), t_min), np.full(len(uk), t_max))
        # P outside what the product table can make is no use either, nor P below the
        # timing-share limit's floor.
        p_lo = np.maximum(w.lo, uk * math.exp(products.ln[0]))
        p_lo = np.maximum(p_lo, share_p_floor(loop, uk, spec.limits.max_timing_share))
        p_hi = np.minimum(w.hi, uk * math.exp(products.ln[-1]))
        amp = amplitude_bounds(loop, uk, p_lo, p_hi)
        share = timing_share_floor(loop, uk, p_lo, p_hi)
        with np.errstate(invalid="ignore", divide="ignore"):
            e_a_lo, e_a_hi = np.log(amp.lo / a_t), np.log(amp.hi / a_t)
        ok = (p_lo <= p_hi) & (e_a_hi >= aa) & (e_a_lo <= ab)
        ok &= share <= spec.limits.max_timing_share
        keep = ok[inv]
        i1, i2, k, inv = i1[keep], i2[keep], k[keep], inv[keep]
        p_lo, p_hi, share, e_a_lo, e_a_hi = (x[inv] for x in (p_lo, p_hi, share, e_a_lo, e_a_hi))
        u = np.full(len(i1), o.index, dtype=np.int64)
        keep = np.ones(len(i1), dtype=bool)
        if spec.limits.guarantee == "worst_case":
            limits = pair_limits(model, u, i1, i2, p_lo, p_hi)
            keep &= limits.keep
            p_lo, p_hi = limits.p_min, limits.p_max
        e_a_gap = np.maximum(0.0, np.maximum(e_a_lo, -e_a_hi))  # |e_a| ≥ this
        base = (
            model.opamp_term(o)
            + r_term[i1]
            + r_term[i2]
            - credit * (i1 == i2)
            + model.amplitude_term(e_a_gap)
            + model.share_term(np.maximum(share, 0.0))
        )
        pairs = _Pairs(u, i1, i2, k, p_lo, p_hi, base, base + floor)
        parts.append(pairs.take(keep))
    if not parts:
        return _no_pairs()
    return _Pairs(
        **{n: np.concatenate([getattr(p, n) for p in parts]) for n in _Pairs.__dataclass_fields__}
    )


def _no_pairs() -> _Pairs:
    z = np.zeros(0, dtype=np.int64)
    f = np.zeros(0)
    return _Pairs(z, z, z, f, f, f, z, z)


def _open(
    model: SearchModel, products: _Products, pairs: _Pairs, theta: int | None, coupled: bool
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
    which, idx = _ranges(lo, hi)
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


def enumerate_top(
    model: SearchModel, top: int, time_limit_s: float, *, coupled: bool = True
) -> EngineResult:
    """The ``top`` best combinations, exact under the full model.

    ``coupled=False`` ignores stock shared between positions and the cost cap (the CP-SAT
    engine lists its table this way and enforces those itself).
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
    proven &= not model.bounds_violated
    return EngineResult(found, proven, evaluated, time.perf_counter() - t0)
