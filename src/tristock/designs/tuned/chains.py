"""Chains of range capacitors: which sets of n capacitors cover the span, cheapest first.

A chain is C1 > C2 > ... > Cn in value (C1 the lowest range), each range given by its ends
[gl, gh] (Hz). It covers low..high with overlap o when

    gl(C1) ≤ low,  gh(Cn) ≥ high,  gh(Cs) ≥ gl(Cs+1)·(1 + o) for every neighbour,
    and every range reaches into the span (gh ≥ low and gl ≤ high) with gl < gh.

The search calls these with optimistic ends (gl at most, gh at least the guaranteed ones, so
every chain that covers with the guaranteed ends covers here too) and the walk re-checks each
chain with the guaranteed ends (``covers``). All functions work on batches of combinations:
arrays (batch, capacitors), capacitor indices in the model's ascending value order.

- ``steps``: allowed neighbour pairs (a before b: value[b] < value[a] and the overlap holds).
- ``completion``: comp[r][a] = the least cost of r more capacitors after a that finish the
  chain (∞ if none), by dynamic programming over r; the least cost of a whole chain of n is
  min over starting a of cost[a] + comp[n - 1][a], and the fewest ranges the first n where
  that is finite.
- ``enumerate_chains``: every chain of exactly n whose cost lies in a window, by depth-first
  search pruned with ``completion`` (a prefix is extended only while its cost plus the least
  completion stays inside the window's top).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.search.model import quantise

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
B = NDArray[np.bool_]
INF = np.iinfo(np.int64).max // 4


@dataclass
class Ranges:
    """Per (combination, capacitor): usable, the ends (Hz), and per capacitor its cost."""

    usable: B
    gl: F64
    gh: F64
    cost: I64  # per capacitor, micro-units
    value: F64  # per capacitor (F), ascending


def starts(r: Ranges, low: float) -> B:
    return np.asarray(r.usable & (r.gl <= low))


def finishes(r: Ranges, high: float) -> B:
    return np.asarray(r.usable & (r.gh >= high))


def reaches_span(gl: F64, gh: F64, low: float, high: float) -> B:
    """A range counts only when it reaches into the span and is a range at all."""
    return np.asarray((gh >= low) & (gl <= high) & (gl < gh))


def steps(r: Ranges, overlap: float) -> B:
    """allowed[batch, a, b]: b may follow a in a chain (module docstring)."""
    later = r.value[None, :] < r.value[:, None]
    ok = r.gh[:, :, None] >= r.gl[:, None, :] * (1 + overlap)
    return np.asarray(later[None, :, :] & ok & r.usable[:, :, None] & r.usable[:, None, :])


def completion(r: Ranges, allowed: B, n: int, high: float) -> list[I64]:
    """comp[s][batch, a] for s = 0..n-1 (module docstring); ∞ is ``INF``."""
    comp = [np.where(finishes(r, high), 0, INF).astype(np.int64)]
    for _ in range(n - 1):
        nxt = np.where(allowed, (r.cost[None, :] + comp[-1])[:, None, :], INF)
        comp.append(np.minimum(nxt.min(axis=2, initial=INF), INF).astype(np.int64))
    return comp


def least_cost(r: Ranges, comp: list[I64], n: int, low: float) -> I64:
    """Least cost of a chain of exactly n per combination (``INF`` if none)."""
    total = np.where(starts(r, low), r.cost[None, :] + comp[n - 1], INF)
    return np.asarray(np.minimum(total.min(axis=1, initial=INF), INF), dtype=np.int64)


def fewest(r: Ranges, overlap: float, low: float, high: float, most: int) -> I64:
    """Fewest ranges per combination that cover (most + 1 when none up to ``most``)."""
    allowed = steps(r, overlap)
    out = np.full(r.gl.shape[0], most + 1, dtype=np.int64)
    reach = starts(r, low)
    for n in range(1, most + 1):
        done = (reach & finishes(r, high)).any(axis=1) & (out > most)
        out[done] = n
        reach = np.asarray((reach[:, :, None] & allowed).any(axis=1))
    return out


@dataclass
class CapCosts:
    """Cheapest capacitor at or above / at or below a value (micro-units, ``INF`` if none)."""

    value: F64
    at_least: I64  # suffix minimum over ascending values
    at_most: I64  # prefix minimum
    cheapest: int

    @classmethod
    def of(cls, cost: I64, value: F64) -> CapCosts:
        """From each capacitor's cost and value (ascending)."""
        if len(cost) == 0:
            z = np.zeros(0, dtype=np.int64)
            return cls(value, z, z, INF)
        return cls(
            value,
            np.minimum.accumulate(cost[::-1])[::-1],
            np.minimum.accumulate(cost),
            int(cost.min()),
        )

    def chain(self, c_min: F64, c_max: F64, n: int) -> I64:
        """Lower bound of the capacitors' cost of a chain of n with C1 ≥ c_min and Cn ≤ c_max
        (``cores``): the cheapest capacitor at or above c_min, plus the cheapest at or below
        c_max, plus (n - 2) times the cheapest of all (n = 1: the larger of the first two)."""
        if len(self.value) == 0:
            return np.full(len(c_min), INF, dtype=np.int64)
        i = np.searchsorted(self.value, c_min, side="left")
        first = np.where(
            i < len(self.value), self.at_least[np.minimum(i, len(self.value) - 1)], INF
        )
        k = np.searchsorted(self.value, c_max, side="right") - 1
        last = np.where(k >= 0, self.at_most[np.maximum(k, 0)], INF)
        out = np.maximum(first, last) if n == 1 else first + last + (n - 2) * self.cheapest
        return np.asarray(np.where((first >= INF) | (last >= INF), INF, out), dtype=np.int64)


@dataclass(frozen=True)
class Changes:
    """For re-optimisation: the old chain (capacitor index per slot, -1 where the old part
    cannot be used) and the exact number of slots that must differ. A slot differs when its
    capacitor does, and every range added or removed counts once."""

    old: tuple[int, ...]
    count: int


def enumerate_chains(
    r: Ranges,
    row: int,
    allowed: B,
    comp: list[I64],
    n: int,
    low: float,
    budget: tuple[int, int],
    changes: Changes | None = None,
) -> Iterator[tuple[tuple[int, ...], int]]:
    """Chains (capacitor indices, C1 first) of exactly n for combination ``row`` whose cost
    lies in (budget[0], budget[1]], with their cost (and, with ``changes``, exactly that
    many changed slots)."""
    lo, hi = budget
    cost = r.cost.tolist()
    rest = [c[row].tolist() for c in comp]  # rest[s][b]: least cost of s + 1 more from b
    ok_start = np.flatnonzero(starts(r, low)[row]).tolist()
    after: dict[int, list[int]] = {}

    def nexts(a: int) -> list[int]:
        if a not in after:
            after[a] = np.flatnonzero(allowed[row, a]).tolist()
        return after[a]

    old = changes.old if changes is not None else ()
    m = len(old)
    want = changes.count - abs(n - m) if changes is not None else 0
    if changes is not None and want < 0:
        return

    def fits(depth: int, differ: int) -> bool:
        if changes is None:
            return True
        left = max(min(n, m) - depth, 0)  # old slots still to decide
        return differ <= want <= differ + left

    def walk(chain: list[int], spent: int, differ: int) -> Iterator[tuple[tuple[int, ...], int]]:
        left = n - len(chain)
        if left == 0:
            if spent > lo and (changes is None or differ == want):
                yield tuple(chain), spent
            return
        depth = len(chain)
        for b in nexts(chain[-1]):
            c = spent + cost[b]
            d = differ + int(depth < m and old[depth] != b)
            if c + rest[left - 1][b] <= hi and fits(depth + 1, d):
                chain.append(b)
                yield from walk(chain, c, d)
                chain.pop()

    for a in ok_start:
        c = cost[a]
        d = int(m > 0 and old[0] != a)
        if c + rest[n - 1][a] <= hi and fits(1, d):
            yield from walk([a], c, d)


def evenness(f_top: F64, f_bottom: F64, chain: tuple[int, ...], overlap: float) -> int:
    """The largest excess overlap of neighbouring ranges at nominal values,
    max ln(f_top(Cs)/f_bottom(Cs+1)) - ln(1 + o), quantised to 1e-6 (0 for one range)."""
    if len(chain) < 2:
        return 0
    worst = max(
        math.log(float(f_top[a]) / float(f_bottom[b])) for a, b in itertools.pairwise(chain)
    )
    return int(quantise(worst - math.log1p(overlap)))


def covers(ends: list[tuple[float, float]], low: float, high: float, overlap: float) -> bool:
    """Whether ranges [gl, gh] (C1 first) cover low..high with the overlap (module docstring)."""
    if not ends or ends[0][0] > low or ends[-1][1] < high:
        return False
    if not all(bool(reaches_span(np.array(lo), np.array(hi), low, high)) for lo, hi in ends):
        return False
    return all(ends[s][1] >= ends[s + 1][0] * (1 + overlap) for s in range(len(ends) - 1))


def least_cost_envelope(
    gl: F64, gh: F64, cost: I64, value: F64, n: int, low: float, high: float, overlap: float
) -> I64:
    """A lower bound of the least cost of a chain of n per row, in O(m·log m) per step.

    Each row's ends are first widened to envelopes monotone in value (gl_env(b) = the least
    gl over capacitors of value at most b's, gh_env(a) = the largest gh over values at least
    a's), which only adds chains. Then the capacitors that may precede b form one run of
    the ascending order: values above b's with gh_env ≥ (1 + o)·gl_env(b), a prefix of the
    larger values since gh_env falls with value. The cheapest prefix ending in that run is a
    range minimum, answered from a sparse table."""
    rows, m = gl.shape
    if m == 0:
        return np.full(rows, INF, dtype=np.int64)
    usable = reaches_span(gl, gh, low, high)
    gl_env = np.minimum.accumulate(np.where(usable, gl, np.inf), axis=1)
    gh_env = np.maximum.accumulate(np.where(usable, gh, 0.0)[:, ::-1], axis=1)[:, ::-1]
    first_larger = np.searchsorted(
        value, value, side="right"
    )  # L(b): first index of a larger value
    # U(b) = number of a with gh_env[a] ≥ (1 + o)·gl_env[b] (gh_env falls along a).
    upto = _count_at_least(gh_env, gl_env * (1 + overlap) * (1 - 1e-9))
    best = np.where(usable & (gl_env <= low), cost[None, :], INF).astype(np.int64)
    for _ in range(n - 1):
        table = _sparse_min(best)
        lo = np.broadcast_to(first_larger[None, :], (rows, m))
        prev = _range_min(table, lo, upto)
        best = np.where(usable & (prev < INF), prev + cost[None, :], INF)
    final = np.where(usable & (gh_env >= high), best, INF)
    return np.asarray(final.min(axis=1), dtype=np.int64)


def _count_at_least(desc: F64, x: F64) -> I64:
    """Per (row, column): how many of the row's values ``desc`` are ≥ x, by one stable sort of
    both per row (on equal keys the row's own values come first, so they count)."""
    rows, m = desc.shape
    keys = np.concatenate([-desc, -x], axis=1)
    order = np.argsort(keys, axis=1, kind="stable")
    is_x = order >= m
    before = np.cumsum(~is_x, axis=1)
    out = np.zeros((rows, m), dtype=np.int64)
    r = np.nonzero(is_x)[0]
    out[r, order[is_x] - m] = before[is_x]
    return out


def _sparse_min(best: I64) -> list[I64]:
    table = [best]
    width = 1
    while 2 * width <= best.shape[1]:
        prev = table[-1]
        nxt = np.full_like(prev, INF)
        nxt[:, : prev.shape[1] - width] = np.minimum(prev[:, :-width], prev[:, width:])
        table.append(nxt)
        width *= 2
    return table


def _range_min(table: list[I64], lo: I64, hi: I64) -> I64:
    """min(best[row, lo:hi]) per (row, column); INF for an empty range."""
    length = hi - lo
    ok = length > 0
    j = np.where(ok, np.floor(np.log2(np.maximum(length, 1))).astype(np.int64), 0)
    rows = np.broadcast_to(np.arange(lo.shape[0])[:, None], lo.shape)
    out = np.full(lo.shape, INF, dtype=np.int64)
    for level in np.unique(j[ok]):
        at = ok & (j == level)
        t = table[level]
        w = 1 << int(level)
        a = t[rows[at], lo[at]]
        b = t[rows[at], hi[at] - w]
        out[at] = np.minimum(a, b)
    return out
