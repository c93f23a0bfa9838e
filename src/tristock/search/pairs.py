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
k = R1/R2 is computed once per loop class and kept (``pairfigures.RatioTable``). Where the
search form narrows the levels by pair (``SearchForm.levels_by_pair``: the zener-clamped
loop, whose load R1 + R2 the pair fixes), the pairs its ratio lets through get their own
level intervals and figures (``pairfigures.pair_levels``, ``narrowed``), all stages' pairs
in batches, and carry their levels (``Pairs.levels``) to the engine's windows and the rows'
run-time guard. Levels rise as the engine needs more pairs; a deadline checked between
chunks (and batches) stops the building (``PairSource.cut``).
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import StageLoop
from tristock.search.guarantee import pair_limits
from tristock.search.model import OpAmpTerms, SearchModel
from tristock.search.pairfigures import (
    Figures,
    RatioTable,
    figures,
    loop_classes,
    narrowed,
    pair_levels,
    pair_loops,
)
from tristock.search.products import ProductIndex, index_ranges

#: Candidate (R1, R2) index pairs generated at once (memory: about 100 bytes each).
CHUNK_CANDIDATES = 1 << 20

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


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
    #: the pair's level intervals (vh_lo, vh_hi, vl_lo, vl_hi) as an (n, 4) array where the
    #: form narrows them by pair (``SearchForm.levels_by_pair``), else (n, 0): the stage's
    levels: NDArray[np.float64]

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

    def loops(self, model: SearchModel) -> StageLoop:
        """Each pair's loop: its stage's with the pair's level intervals (``levels``)."""
        return pair_loops(model, self.u, self.levels)


def no_pairs(width: int = 0) -> Pairs:
    """No pairs; ``width`` the columns of ``levels`` (4 where the form narrows by pair)."""
    z = np.zeros(0, dtype=np.int64)
    f = np.zeros(0)
    return Pairs(z, z, z, f, f, f, z, z, np.zeros((0, width)))


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
        #: ``stage_term`` of every stage option by its index
        self.stage_terms = np.zeros(len(self.position), dtype=np.int64)
        at = self.indices
        self.stage_terms[at] = model.stage_terms[at] - model.stage_line_credits[at]
        self.lowest = np.inf
        self.highest = -np.inf
        if self.opamps:
            op_terms = [self.stage_term(o) for _, o in self.opamps]
            least = int(self.r1_terms[0] + self.r2_terms[0]) - self.credit + self.floor
            most = int(self.r1_terms[-1] + self.r2_terms[-1]) + self.floor
            self.lowest, self.highest = min(op_terms) + least, max(op_terms) + most
        self.built_to = -np.inf  # every pair with part bound <= built_to is in ``pairs``
        self.by_pair = model.form.levels_by_pair
        self.pairs = no_pairs(4 if self.by_pair else 0)
        loops = model.loops(self.indices)
        self.loop_class, class_position = loop_classes(loops)
        #: the figures of each ratio by loop class (shared by stages of equal loops): the
        #: pairs' own where the levels do not depend on the pair, else a first screen
        self.ratios = RatioTable(model, products, loops.take(class_position))
        self.groups = self._stage_groups()

    def stage_term(self, o: OpAmpTerms) -> int:
        """A lower bound of stage ``o``'s share of a row's score: its own term less the
        line credit a row can gain from repeating its resistor codes."""
        return int(self.stage_terms[o.index])

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
        filter the pairs, or the pairs' levels follow the stage's own parts
        (``levels_by_pair``): then one stage a group."""
        model = self.model
        if self.by_pair or (
            model.spec.limits.guarantee == "worst_case" and model.form.probes_in_box
        ):
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
        value = self.model.resistors.value
        ratios = [
            (int(self.loop_class[pos]), value[i1] / value[i2]) for pos, _, (i1, i2), _ in todo
        ]
        if not self.ratios.learn(ratios, self.deadline):
            self.cut = True
            return
        screened: list[tuple[Screened, list[tuple[int, OpAmpTerms]]]] = []
        for pos, o, (i1, i2), group in todo:
            if time.perf_counter() > self.deadline:
                self.cut = True
                break
            screened.append((self._screen(pos, o, i1, i2), group))
        if self.by_pair:  # every stage its own group: one narrowing over all of them
            screened = [(self._narrowed(Screened.concat([s for s, _ in screened])), [])]
        parts = [self.pairs]
        for found, group in screened:
            pairs = self._pairs(found)
            parts.append(pairs)
            for _, other in group[1:]:
                parts.append(
                    dataclasses.replace(pairs, u=np.full(len(pairs), other.index, np.int64))
                )
        self.pairs = Pairs.concat(parts)
        if not self.cut:
            self.built_to = x

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

    def _screen(self, pos: int, o: OpAmpTerms, i1: I64, i2: I64) -> Screened:
        """The pairs (i1, i2) of stage ``o`` whose ratio's figures let them meet the spec."""
        if len(i1) == 0:
            return Screened(i1, i2, i1, Figures.empty(), np.zeros((0, 0)))
        res = self.model.resistors
        k = res.value[i1] / res.value[i2]
        # Pairs of equal ratio share the ratio's figures: work on the distinct k.
        uk, inv = np.unique(k, return_inverse=True)
        fig = self.ratios.lookup(int(self.loop_class[pos]), uk)
        keep = fig.ok[inv]  # most candidates fail here: gather the figures of the rest only
        u = np.full(int(np.sum(keep)), o.index, dtype=np.int64)
        return Screened(u, i1[keep], i2[keep], fig.take(inv[keep]), np.zeros((len(u), 0)))

    def _pairs(self, found: Screened) -> Pairs:
        """The screened pairs that can meet the spec, with their bounds."""
        model = self.model
        u, i1, i2, fig = found.u, found.i1, found.i2, found.fig
        p_lo, p_hi = fig.p_lo, fig.p_hi
        keep = np.ones(len(i1), dtype=bool)
        if model.spec.limits.guarantee == "worst_case" and model.form.probes_in_box:
            limits = pair_limits(model, u, i1, i2, p_lo, p_hi)
            keep &= limits.keep
            p_lo, p_hi = limits.p_min, limits.p_max
        e_a_gap = np.maximum(0.0, np.maximum(fig.e_a_lo, -fig.e_a_hi))  # |e_a| ≥ this
        base = (
            self.stage_terms[u]
            + self.r_term[i1]
            + self.r_term[i2]
            - self.credit * (i1 == i2)
            + model.amplitude_term(e_a_gap)
            + model.share_term(np.maximum(fig.share, 0.0))
        )
        levels = found.levels if self.by_pair else np.zeros((len(u), 0))
        return Pairs(u, i1, i2, fig.k, p_lo, p_hi, base, base + self.floor, levels).take(keep)

    def _narrowed(self, found: Screened) -> Screened:
        """The pairs that can still meet the spec with their own level intervals
        (``pairfigures.pair_levels``), their figures narrowed to the pair's loop
        (``pairfigures.narrowed``: the ratio's and the pair's both hold every row through
        the pair) and their levels; in batches of every stage's pairs together, between
        deadline checks (``cut`` and the pairs done so far when it comes)."""
        model = self.model
        done: list[Screened] = []
        for start in range(0, len(found.u), PAIR_BATCH):
            if time.perf_counter() > self.deadline:
                self.cut = True
                break
            part = found.take(np.arange(start, min(start + PAIR_BATCH, len(found.u))))
            levels = pair_levels(model, part.u, part.i1, part.i2)
            loop = pair_loops(model, part.u, levels)
            fig = narrowed(part.fig, figures(model, self.products, loop, part.fig.k))
            keep = np.flatnonzero(fig.ok)
            done.append(Screened(part.u, part.i1, part.i2, fig, levels).take(keep))
        return Screened.concat(done)


@dataclass
class Screened:
    """Pairs (stage ``u``, R1 ``i1``, R2 ``i2``) with their figures so far and their level
    intervals ((n, 4); (n, 0) before ``PairSource._narrowed``)."""

    u: I64
    i1: I64
    i2: I64
    fig: Figures
    levels: F64

    def take(self, sel: I64) -> Screened:
        return Screened(self.u[sel], self.i1[sel], self.i2[sel], self.fig.take(sel),
                        self.levels[sel])  # fmt: skip

    @staticmethod
    def concat(parts: list[Screened]) -> Screened:
        if not parts:
            z = np.zeros(0, dtype=np.int64)
            return Screened(z, z, z, Figures.empty(), np.zeros((0, 4)))
        u, i1, i2 = (np.concatenate([getattr(p, n) for p in parts]) for n in ("u", "i1", "i2"))
        fig = Figures.concat([p.fig for p in parts])
        return Screened(u, i1, i2, fig, np.concatenate([p.levels for p in parts]))


#: Pairs whose own levels and figures are computed in one call (all stages together),
#: between deadline checks.
PAIR_BATCH = 8192
