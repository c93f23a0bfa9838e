"""The (R1, R2) pairs of the enumeration engine, built level by level against a score bound.

A pair (U1, R1, R2) carries a lower bound on the score of every row through it (``bound``):
its exact part terms, the floors of its amplitude and timing-share terms over its P window,
and the smallest (R3, C1) term. The window and those floors cost a full-model bound each
(``search.bounds``), and a big catalog has millions of pairs of which a few hundred can reach
the top, so the pairs are not all built up front. Their *part bound*

    part = term(U1) + term(R1) + term(R2) - credit·[R1 = R2] + floor,

floor the smallest (R3, C1) term less the shared-line credit, needs no model and is never
above ``bound`` (the amplitude and share terms are not negative). ``PairSource.complete(x)``
builds, in chunks of R1 and per op amp, only the pairs whose part bound is at most ``x`` (R2
drawn from the resistors whose own term leaves room, by binary search in value order), and
returns every pair with ``bound`` <= x: a complete prefix of the pairs in the order (bound,
U1, R1, R2), the order in which the engine opens them. The window of each distinct ratio
k = R1/R2 is computed once per op amp and kept. Levels rise as the engine needs more pairs;
a deadline checked between chunks stops the building (``PairSource.cut``).
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import StageLoop
from tristock.search.bounds import (
    p_ceiling,
    p_floor,
    range_bounds,
    share_p_floor,
    window,
)
from tristock.search.guarantee import pair_limits
from tristock.search.model import OpAmpTerms, SearchModel
from tristock.search.products import ProductIndex, index_ranges

#: Candidate (R1, R2) index pairs generated at once (memory: about 100 bytes each).
CHUNK_CANDIDATES = 1 << 20
#: Ratios whose bounds are computed in one call, between deadline checks.
RATIO_BATCH = 2048


@dataclass
class Pairs:
    u: NDArray[np.int64]
    i1: NDArray[np.int64]
    i2: NDArray[np.int64]
    k: NDArray[np.float64]
    p_min: NDArray[np.float64]  # the nominal P a row needs: band, product table, guarantee
    p_max: NDArray[np.float64]
    base: NDArray[np.int64]  # score terms of U1, R1, R2 and floors of the amplitude and share
    bound: NDArray[np.int64]  # base + the best (R3, C1) term

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> Pairs:
        return Pairs(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})

    def __len__(self) -> int:
        return len(self.u)

    @staticmethod
    def concat(parts: list[Pairs]) -> Pairs:
        if not parts:
            return no_pairs()
        return Pairs(
            **{
                n: np.concatenate([getattr(p, n) for p in parts])
                for n in Pairs.__dataclass_fields__
            }
        )


def no_pairs() -> Pairs:
    z = np.zeros(0, dtype=np.int64)
    f = np.zeros(0)
    return Pairs(z, z, z, f, f, f, z, z)


@dataclass
class _RatioFigures:
    """Per op amp, what each distinct k = R1/R2 allows (sorted by k)."""

    k: NDArray[np.float64]
    p_lo: NDArray[np.float64]
    p_hi: NDArray[np.float64]
    share: NDArray[np.float64]
    e_a_lo: NDArray[np.float64]
    e_a_hi: NDArray[np.float64]
    ok: NDArray[np.bool_]


class PairSource:
    """The pairs of one search model, built on demand (module docstring)."""

    def __init__(self, model: SearchModel, products: ProductIndex, deadline: float) -> None:
        self.model = model
        self.products = products
        self.deadline = deadline
        self.cut = False  # the deadline stopped the building: what is built is incomplete
        res = model.resistors
        self.r_term = model.resistor_term(np.arange(len(res)))
        self.credit = model.shared_line_credit()
        self.floor = 0 if products.empty else products.min_term - self.credit
        use_u1 = model.allows("U1", len(model.opamps))
        self.use_r1 = model.allows("R1", len(res))
        self.use_r2 = model.allows("R2", len(res))
        usable = not products.empty and bool(np.any(self.use_r1)) and bool(np.any(self.use_r2))
        self.opamps: list[tuple[int, OpAmpTerms]] = [
            (pos, o) for pos, o in enumerate(model.opamps) if usable and use_u1[o.index]
        ]
        self.indices = np.array([o.index for o in model.opamps], dtype=np.int64)
        self.position = np.zeros(max((o.index for o in model.opamps), default=-1) + 1, np.int64)
        for pos, o in enumerate(model.opamps):
            self.position[o.index] = pos
        # R2 candidates in order of their term, to take those within a budget as a prefix.
        r2 = np.flatnonzero(self.use_r2)
        self.r2_by_term = r2[np.argsort(self.r_term[r2], kind="stable")]
        self.r2_terms = self.r_term[self.r2_by_term]
        r1 = np.flatnonzero(self.use_r1)
        self.r1_by_term = r1[np.argsort(self.r_term[r1], kind="stable")]
        self.r1_terms = self.r_term[self.r1_by_term]
        self.lowest = np.inf
        self.highest = -np.inf
        if self.opamps:
            op_terms = [self.stage_term(o) for _, o in self.opamps]
            least = int(self.r1_terms[0] + self.r2_terms[0]) - self.credit + self.floor
            most = int(self.r1_terms[-1] + self.r2_terms[-1]) + self.floor
            self.lowest, self.highest = min(op_terms) + least, max(op_terms) + most
        self.built_to = -np.inf  # every pair with part bound <= built_to is in ``pairs``
        self.pairs = no_pairs()
        #: figures by loop class: stage options with equal ``StageLoop`` share them (the
        #: figures depend on the loop alone), e.g. one U1 and U2 with any pull-up R5
        self.ratios: dict[int, _RatioFigures] = {}
        self.loop_class, self.class_position = loop_classes(model.loops(self.indices))
        self.groups = self._stage_groups()

    def stage_term(self, o: OpAmpTerms) -> int:
        """A lower bound of stage ``o``'s share of a row's score: its own term less the
        line credit a row can gain from repeating its resistor codes."""
        return int(self.model.stage_terms[o.index]) - self.model.stage_line_credit(o)

    @property
    def everything(self) -> bool:
        """Every pair is built."""
        return self.built_to >= self.highest

    def first_level(self) -> float:
        """A first part-bound level: a 256th of the span of part bounds above the lowest."""
        if not self.opamps:
            return math.inf
        return float(self.lowest + max((self.highest - self.lowest) / 256.0, 1.0))

    def complete(self, x: float) -> Pairs:
        """Every pair with ``bound`` <= x, in the order (bound, U1, R1, R2) (module
        docstring); ``cut`` is set if the deadline stopped the building first."""
        if x > self.built_to and not self.everything:
            self._build(x)
        mine = self.pairs.take(self.pairs.bound <= x)
        order = np.lexsort((mine.i2, mine.i1, self.position[mine.u], mine.bound))
        return mine.take(order)

    def _stage_groups(self) -> list[list[tuple[int, OpAmpTerms]]]:
        """The stage options whose pairs are the same but for U1's index: equal loops (so
        equal ratio figures and k ranges) and equal ``stage_term`` (e.g. one U1 and U2 with
        pull-ups R5 of equal cost), unless the worst-case probes, which follow each stage,
        filter the pairs (then one stage a group)."""
        if self.model.spec.limits.guarantee == "worst_case" and self.model.form.probes_in_box:
            return [[member] for member in self.opamps]
        groups: dict[tuple[int, int], list[tuple[int, OpAmpTerms]]] = {}
        for pos, o in self.opamps:
            key = (int(self.loop_class[pos]), self.stage_term(o))
            groups.setdefault(key, []).append((pos, o))
        return list(groups.values())

    def _build(self, x: float) -> None:
        todo = []
        for group in self.groups:
            if time.perf_counter() > self.deadline:
                self.cut = True
                return
            pos, o = group[0]
            todo += [(pos, o, chunk, group) for chunk in self._candidates(o, x)]
        if not self._learn_ratios([(pos, o, chunk) for pos, o, chunk, _ in todo]):
            return
        parts = [self.pairs]
        for pos, o, (i1, i2), group in todo:
            if time.perf_counter() > self.deadline:
                self.cut = True
                break
            found = self._figures(pos, o, i1, i2)
            parts.append(found)
            for _, other in group[1:]:
                parts.append(
                    dataclasses.replace(found, u=np.full(len(found), other.index, np.int64))
                )
        self.pairs = Pairs.concat(parts)
        if not self.cut:
            self.built_to = x

    def _learn_ratios(
        self, todo: list[tuple[int, OpAmpTerms, tuple[NDArray[np.int64], NDArray[np.int64]]]]
    ) -> bool:
        """Compute the figures of every ratio the new pairs have and no kept one does, all
        op amps together (the bounds are vectorised over op amps too), in batches between
        deadline checks; False if the deadline came first."""
        value = self.model.resistors.value
        wanted: dict[int, list[NDArray[np.float64]]] = {}
        for pos, _, (i1, i2) in todo:
            wanted.setdefault(int(self.loop_class[pos]), []).append(value[i1] / value[i2])
        us, ks = [], []
        for cls, parts in wanted.items():
            uk = np.unique(np.concatenate(parts))
            known = self.ratios.get(cls)
            if known is not None and len(known.k):
                at = np.minimum(np.searchsorted(known.k, uk), len(known.k) - 1)
                uk = uk[known.k[at] != uk]
            us.append(np.full(len(uk), cls, dtype=np.int64))
            ks.append(uk)
        if not us:
            return True
        u_all, k_all = np.concatenate(us), np.concatenate(ks)
        fresh: list[_RatioFigures] = []
        for start in range(0, len(k_all), RATIO_BATCH):
            if time.perf_counter() > self.deadline:
                self.cut = True
                return False
            part = slice(start, start + RATIO_BATCH)
            fresh.append(self._compute_ratios(self.class_position[u_all[part]], k_all[part]))
        if not fresh:
            return True
        merged = _RatioFigures(*(np.concatenate([getattr(f, n) for f in fresh]) for n in _FIELDS))
        for pos in np.unique(u_all):
            mine = u_all == pos
            new = _RatioFigures(*(getattr(merged, n)[mine] for n in _FIELDS))
            known = self.ratios.get(int(pos))
            if known is not None:
                new = _RatioFigures(
                    *(np.concatenate([getattr(known, n), getattr(new, n)]) for n in _FIELDS)
                )
            order = np.argsort(new.k, kind="stable")
            self.ratios[int(pos)] = _RatioFigures(*(getattr(new, n)[order] for n in _FIELDS))
        return True

    def _candidates(
        self, o: OpAmpTerms, x: float
    ) -> list[tuple[NDArray[np.int64], NDArray[np.int64]]]:
        """(i1, i2) with built_to < part bound <= x for op amp ``o``, in chunks."""
        above = self.built_to
        c = self.stage_term(o) + self.floor
        # R1 whose term leaves room for the cheapest R2 (the credit can only help).
        r1 = self.r1_by_term[
            : np.searchsorted(self.r1_terms, x - c - self.r2_terms[0] + self.credit, "right")
        ]
        if len(r1) == 0:
            return []
        r1 = np.sort(r1)
        r2 = np.sort(
            self.r2_by_term[
                : np.searchsorted(
                    self.r2_terms, x - c - self.r_term[r1].min() + self.credit, "right"
                )
            ]
        )
        ln_r = self.model.resistors.ln_value
        k_lo, k_hi = o.k_range
        lo = np.searchsorted(ln_r, ln_r[r1] - math.log(k_hi) - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r[r1] - math.log(k_lo) + 1e-12, side="right")
        lo, hi = np.searchsorted(r2, lo, "left"), np.searchsorted(r2, hi, "left")
        counts = np.maximum(hi - lo, 0)
        out = []
        start = 0
        total = np.cumsum(counts)
        while start < len(r1):
            base = total[start - 1] if start else 0
            stop = max(int(np.searchsorted(total, base + CHUNK_CANDIDATES, "right")), start + 1)
            which, at = index_ranges(lo[start:stop], hi[start:stop])
            i1, i2 = r1[start:stop][which], r2[at]
            part = c + self.r_term[i1] + self.r_term[i2] - self.credit * (i1 == i2)
            keep = (part > above) & (part <= x)
            out.append((i1[keep], i2[keep]))
            start = stop
        return out

    def _ratio_figures(self, pos: int, uk: NDArray[np.float64]) -> _RatioFigures:
        """The kept figures of each k in ``uk`` (sorted, distinct) for op amp ``pos``."""
        known = self.ratios[int(self.loop_class[pos])]
        at = np.searchsorted(known.k, uk)
        return _RatioFigures(*(getattr(known, n)[at] for n in _FIELDS))

    def _compute_ratios(self, pos: NDArray[np.int64], uk: NDArray[np.float64]) -> _RatioFigures:
        """The window, amplitude and share floors of ratio ``uk[n]`` on op amp ``pos[n]``.

        A screen comes first: every row's P lies in [floor, ceiling] (the products' range,
        the timing share's floors ``bounds.share_p_floor`` and ``bounds.p_floor``, and
        ``bounds.p_ceiling``), and the amplitude and share bounds over that range, two
        timings per ratio, already rule most ratios out; only the others get their window
        (a root search at each end) and their figures. A ratio ruled out is not ``ok``."""
        model = self.model
        spec = model.spec
        ln_min, ln_max = self.products.ln_min, self.products.ln_max
        (fa, fb), (aa, ab) = model.band_f, model.band_a
        t_target = 1.0 / spec.target.target_hz
        t_min = float(t_target * np.exp(-np.array(fb)) * (1 - PERIOD_EDGE))
        t_max = float(t_target * np.exp(-np.array(fa)) * (1 + PERIOD_EDGE))
        loop = model.loops(self.indices[pos])
        floor = np.maximum(
            uk * math.exp(ln_min), share_p_floor(loop, uk, spec.limits.max_timing_share)
        )
        screen_floor = np.maximum(floor, p_floor(loop, t_min, spec.limits.max_timing_share))
        ceiling = np.minimum(uk * math.exp(ln_max), p_ceiling(loop, uk, t_max))
        e_a_lo, e_a_hi, share = self._amplitude_logs(loop, uk, screen_floor, ceiling)
        with np.errstate(invalid="ignore"):
            out = (screen_floor > ceiling) | (e_a_hi < aa) | (e_a_lo > ab)
            out |= share > spec.limits.max_timing_share
        nan = np.full(len(uk), np.nan)
        fig = _RatioFigures(uk, nan, nan.copy(), nan.copy(), nan.copy(), nan.copy(), ~out)
        n = np.flatnonzero(~out)
        if len(n) == 0:
            return fig
        loop, k = loop.take(n), uk[n]
        w = window(loop, k, np.full(len(k), t_min), np.full(len(k), t_max))
        # P outside what the products can make is no use either, nor P below the
        # timing-share limit's floor.
        p_lo, p_hi = np.maximum(w.lo, floor[n]), np.minimum(w.hi, uk[n] * math.exp(ln_max))
        lo, hi, share = self._amplitude_logs(loop, k, p_lo, p_hi)
        ok = (p_lo <= p_hi) & (hi >= aa) & (lo <= ab)
        ok &= share <= spec.limits.max_timing_share
        for name, value in zip(_FIELDS[1:], (p_lo, p_hi, share, lo, hi, ok), strict=True):
            getattr(fig, name)[n] = value
        return fig

    def _amplitude_logs(
        self, loop: StageLoop, k: NDArray[np.float64], p_lo: NDArray[np.float64],
        p_hi: NDArray[np.float64],
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:  # fmt: skip
        """ln(A/A_target) at the ends of the amplitude bounds over [p_lo, p_hi], and the
        floor of the timing share there (``bounds.range_bounds``)."""
        amp, share = range_bounds(loop, k, p_lo, p_hi)
        a_t = self.model.spec.triangle.amplitude_vpp
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.log(amp.lo / a_t), np.log(amp.hi / a_t), share

    def _figures(
        self, pos: int, o: OpAmpTerms, i1: NDArray[np.int64], i2: NDArray[np.int64]
    ) -> Pairs:
        """The pairs (i1, i2) of op amp ``o`` that can meet the spec, with their bounds."""
        model = self.model
        if len(i1) == 0:
            return no_pairs()
        res = model.resistors
        k = res.value[i1] / res.value[i2]
        # Pairs of equal ratio share everything below: work on the distinct k.
        uk, inv = np.unique(k, return_inverse=True)
        fig = self._ratio_figures(pos, uk)
        keep = fig.ok[inv]
        i1, i2, k, inv = i1[keep], i2[keep], k[keep], inv[keep]
        p_lo, p_hi, share, e_a_lo, e_a_hi = (
            x[inv] for x in (fig.p_lo, fig.p_hi, fig.share, fig.e_a_lo, fig.e_a_hi)
        )
        u = np.full(len(i1), o.index, dtype=np.int64)
        keep = np.ones(len(i1), dtype=bool)
        if model.spec.limits.guarantee == "worst_case" and model.form.probes_in_box:
            limits = pair_limits(model, u, i1, i2, p_lo, p_hi)
            keep &= limits.keep
            p_lo, p_hi = limits.p_min, limits.p_max
        e_a_gap = np.maximum(0.0, np.maximum(e_a_lo, -e_a_hi))  # |e_a| ≥ this
        base = (
            self.stage_term(o)
            + self.r_term[i1]
            + self.r_term[i2]
            - self.credit * (i1 == i2)
            + model.amplitude_term(e_a_gap)
            + model.share_term(np.maximum(share, 0.0))
        )
        return Pairs(u, i1, i2, k, p_lo, p_hi, base, base + self.floor).take(keep)


def loop_classes(loops: StageLoop) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The class of each loop (equal loops, every field bit for bit, NaN equal to NaN, share
    one) and one position of each class."""
    fields = [np.asarray(f, dtype=np.float64) for f in loops]
    n = max((len(f) for f in fields if f.ndim), default=0)
    if n == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    columns = [np.broadcast_to(f, (n,)) for f in fields]
    key = np.stack([np.nan_to_num(c, nan=0.0) for c in columns] + [np.isnan(c) for c in columns])
    _, first, inverse = np.unique(key.T, axis=0, return_index=True, return_inverse=True)
    return np.asarray(inverse, dtype=np.int64).reshape(-1), np.asarray(first, dtype=np.int64)


_FIELDS = tuple(_RatioFigures.__dataclass_fields__)
#: The period band is widened by this relative amount before windows are taken, so a row on
#: the band's edge whose computed period rounds differently from the bounds' stays inside.
PERIOD_EDGE = 1e-12
