"""The (R3, C1) choices of the enumeration engine, found per window without a product table.

A row's P is k·R3·C1, and a pair (U1, R1, R2) of the engine opens the rows whose ln(R3·C1)
lies in a window [ln_lo, ln_hi] (``search.enumeration``). Listing every (R3, C1) sorted by
ln(R3·C1) once would answer each window with two binary searches, but it has |R|·|C| entries
(10 million for 7,211 eligible resistors and 1,381 capacitors: with its index and term arrays
and the sort, most of a 1.8 GB peak), built before the search can look at its deadline.
The index keeps instead the eligible R3 sorted by value and the eligible C1 grouped by
value; for one window
and one capacitor value c, the R3 that fit are one contiguous range of the sorted ln R (the
sum ln R + c, rounded, never falls as ln R rises), found by binary search of ln_lo - c and
ln_hi - c widened by ``SEARCH_MARGIN``, then held to the table's own test

    ln_lo ≤ ln R3 + ln C1 ≤ ln_hi    (the same floating-point sum the table held),

so a window yields exactly the (R3, C1) a sorted table would have given it. Each row also
gets its score term, term(R3) + term(C1) (``SearchModel.resistor_term``, ``capacitor_term``),
and a budget on that term drops rows before they are listed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.search.model import SearchModel

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]

#: Widening (in ln units) of each binary search before the exact test: far above the
#: rounding of ln_lo - c, so no R3 that passes the test is missed.
SEARCH_MARGIN = 1e-9


def index_ranges(lo: I64, hi: I64) -> tuple[I64, I64]:
    """Flatten index ranges [lo[n], hi[n]): (n for each element, the element's index)."""
    counts = np.maximum(hi - lo, 0)
    which = np.repeat(np.arange(len(counts), dtype=np.int64), counts)
    offsets = np.repeat(np.cumsum(counts) - counts, counts)
    return which, (np.repeat(lo, counts) + np.arange(len(which)) - offsets).astype(np.int64)


@dataclass
class Choices:
    """Rows of a set of windows: ``which`` window each belongs to, its R3 and C1 (indices
    into the model's tables) and its (R3, C1) score term."""

    which: I64
    i3: I64
    j: I64
    term: I64

    def __len__(self) -> int:
        return len(self.which)


@dataclass
class ProductIndex:
    """The eligible R3 and C1 of one search model, ready to answer windows (module
    docstring). ``r_index`` holds the R3 in value order, ``ln_r`` their ln R; the C1 come in
    groups of equal value: group g has ln C ``c_ln[g]`` and the capacitors
    ``c_index[c_start[g]:c_start[g + 1]]``."""

    ln_r: F64
    r_index: I64
    r_term: I64
    c_ln: F64
    c_start: I64
    c_index: I64
    c_term: I64  # term of each entry of c_index
    group_term: I64  # the smallest term of each capacitor group

    @property
    def empty(self) -> bool:
        return len(self.r_index) == 0 or len(self.c_index) == 0

    @property
    def ln_min(self) -> float:
        """The smallest ln(R3·C1) (the rounded sum of the two smallest logs is the smallest
        rounded sum)."""
        return float(self.ln_r[0] + self.c_ln[0])

    @property
    def ln_max(self) -> float:
        return float(self.ln_r[-1] + self.c_ln[-1])

    @property
    def min_term(self) -> int:
        """The smallest term(R3) + term(C1) of any (R3, C1)."""
        return int(self.r_term.min() + self.c_term.min())

    def spans(self, ln_lo: F64, ln_hi: F64) -> tuple[I64, I64]:
        """For each window n and capacitor group g, the range [lo, hi) of ``ln_r`` that can
        hold its R3 (the binary searches, widened): two (windows, groups) arrays."""
        with np.errstate(invalid="ignore"):
            a = (ln_lo[:, None] - self.c_ln[None, :]) - SEARCH_MARGIN
            b = (ln_hi[:, None] - self.c_ln[None, :]) + SEARCH_MARGIN
        return (
            np.searchsorted(self.ln_r, a, side="left").astype(np.int64),
            np.searchsorted(self.ln_r, b, side="right").astype(np.int64),
        )

    def sizes(self, ln_lo: F64, ln_hi: F64) -> I64:
        """An upper bound of each window's number of rows (before the exact test)."""
        lo, hi = self.spans(ln_lo, ln_hi)
        counts = np.maximum(hi - lo, 0) * np.diff(self.c_start)[None, :]
        return np.asarray(counts.sum(axis=1), dtype=np.int64)

    def choices(self, ln_lo: F64, ln_hi: F64, budget: I64 | None = None) -> Choices:
        """Every (R3, C1) with ln_lo[n] ≤ ln R3 + ln C1 ≤ ln_hi[n] (and, with ``budget``,
        term(R3) + term(C1) ≤ budget[n]) for each window n."""
        lo, hi = self.spans(ln_lo, ln_hi)
        n_groups = len(self.c_ln)
        if budget is not None:  # groups whose cheapest R3 and C1 already cost too much
            too_dear = self.r_term.min() + self.group_term[None, :] > budget[:, None]
            hi = np.where(too_dear, lo, hi)
        cell, at = index_ranges(lo.ravel(), hi.ravel())
        window, group = cell // n_groups, cell % n_groups
        total = self.ln_r[at] + self.c_ln[group]
        keep = (total >= ln_lo[window]) & (total <= ln_hi[window])
        if budget is not None:
            keep &= self.r_term[at] + self.group_term[group] <= budget[window]
        window, group, at = window[keep], group[keep], at[keep]
        start = self.c_start[group]
        members, slot = index_ranges(start, self.c_start[group + 1])
        window, at = window[members], at[members]
        term = self.r_term[at] + self.c_term[slot]
        keep = np.ones(len(slot), dtype=bool) if budget is None else term <= budget[window]
        return Choices(window[keep], self.r_index[at[keep]], self.c_index[slot[keep]], term[keep])


def product_index(model: SearchModel) -> ProductIndex:
    """The index of the model's eligible R3 (``allows("R3")``) and C1 (``allows("C1")``)."""
    res, cap = model.resistors, model.capacitors
    r = np.flatnonzero(model.allows("R3", len(res))).astype(np.int64)  # value order already
    c = np.flatnonzero(model.allows("C1", len(cap))).astype(np.int64)
    ln_c = cap.ln_value[c]
    c_ln, c_start = np.unique(ln_c, return_index=True)
    c_term = model.capacitor_term(c)
    starts = np.append(c_start, len(c)).astype(np.int64)
    group_term = np.minimum.reduceat(c_term, c_start) if len(c) else np.zeros(0, dtype=np.int64)
    return ProductIndex(
        ln_r=res.ln_value[r],
        r_index=r,
        r_term=model.resistor_term(r),
        c_ln=c_ln,
        c_start=starts,
        c_index=c,
        c_term=c_term,
        group_term=np.asarray(group_term, dtype=np.int64),
    )
