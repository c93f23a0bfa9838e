"""Shared-part combinations in order of a lower bound on the cost of any design they make.

A core is (U1, RV1, R4, R3) (R4 only for the divider); a combination adds an (R1, R2) pair
from the op amp's window (``model.Pairs``). ``shared_bounds`` gives each core, for every pair
it may take, the fewest ranges it can cover the span with and the capacitor window (smallest
C1, largest Cn). The cost of any design with n ranges through the core is then at least

    cost(U1, RV1, R4, R3) + cheapest pair + chain(n),
    chain(n) = cheapest capacitor ≥ C1min + cheapest ≤ Cnmax + (n - 2)·cheapest capacitor

(for n = 1 the larger of the first two). ``Cores.select`` lists every combination whose bound
(with its own pair's cost) is at most a threshold θ, for designs with n ranges; ``tighten``
gives one combination the same bounds with its pair's exact k and tolerances
(``pair_factors``), when the walk reaches it. Nothing is left out that could cost θ or less.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.designs.tuned.bounds import (
    TopRoots,
    chain_floor,
    chain_floor_and_ranges,
    shared_bounds,
    top_roots,
)
from tristock.designs.tuned.chains import INF, CapCosts
from tristock.designs.tuned.corners import KFactors, corners, pair_factors, window_factors
from tristock.designs.tuned.keys import IntCache, TimeUp
from tristock.designs.tuned.model import MAX_RANGES, Pairs, TunedModel
from tristock.designs.tuned.network import Shared, empty_shared

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]
#: (core, bin of k) rows sieved at a time (the cores of one op amp, each with every bin).
ROWS = 1 << 17
#: Chain floors computed at a time (between two looks at the clock).
FLOOR_BATCH = 1024
#: Cores whose shared bounds are computed at a time (between two looks at the clock; every
#: core's bounds are its own, so the size changes no value).
CORE_BATCH = 16384
#: Width of a bin of k = R1/R2 (in ln k) for the chain floor.
BIN_WIDTH = 0.01
#: Neighbouring bins whose joint chain floor is asked first (it bounds each of theirs).
GROUP = 16
MAX_BINS = 1 << 12


@dataclass
class Bins:
    """One op amp's pairs grouped by k into bins of width ``BIN_WIDTH`` in ln k, each sorted
    by cost: per bin its pairs' smallest and largest k and cheapest cost, and the k factors
    at the corners z2 and z1 allowing every resistor of the catalog as R1 and R2
    (``bounds.window_factors``). ``k_bottom``/``k_top``: the op amp's window (the cores'
    capacitor window was taken at them)."""

    pairs: Pairs
    start: I64
    end: I64
    k_a: F64
    k_b: F64
    cheapest: I64
    window: KFactors
    k_bottom: float
    k_top: float

    def __len__(self) -> int:
        return len(self.start)

    @classmethod
    def of(cls, model: TunedModel, u: int, pairs: Pairs, k_lo: float, k_hi: float) -> Bins:
        which = np.floor((np.log(pairs.k) - np.log(k_lo)) / BIN_WIDTH).astype(np.int64)
        order = np.lexsort((pairs.i2, pairs.i1, pairs.cost, which))
        pairs = pairs.take(order)
        which = which[order]
        _, start = np.unique(which, return_index=True)
        end = np.append(start[1:], len(which))
        window = window_factors(model, np.array([u], dtype=np.int64))
        if len(start) == 0:
            z, f = np.zeros(0, dtype=np.int64), np.zeros(0)
            return cls(pairs, z, z, f, f, z, window, k_lo, k_hi)
        k_a = np.minimum.reduceat(pairs.k, start)
        k_b = np.maximum.reduceat(pairs.k, start)
        return cls(pairs, start, end, k_a, k_b, pairs.cost[start], window, k_lo, k_hi)

    def factors(self, k_a: F64, k_b: F64) -> KFactors:
        """The k factors of rows with k over [k_a, k_b] (a bin's interval or a group's)."""
        w = self.window
        n = len(k_a)

        def wide(x: F64) -> F64:
            return np.repeat(x[:, :1], n, axis=1)

        return KFactors(
            k_a,
            k_b,
            wide(w.f2_lo),
            wide(w.f2_hi),
            wide(w.f1_lo),
            wide(w.f1_hi),
        )

    def group_k(self) -> tuple[F64, F64]:
        """The k interval of every group of ``GROUP`` neighbouring bins."""
        at = np.arange(0, len(self.start), GROUP)
        return np.minimum.reduceat(self.k_a, at), np.maximum.reduceat(self.k_b, at)

    def expand(self, rows_bin: I64, room: I64) -> tuple[I64, I64]:
        """(row, pair index) for every pair of each row's bin costing at most its room."""
        big = int(self.pairs.cost.max()) + 1 if len(self.pairs) else 1
        which = np.repeat(np.arange(len(self.start)), self.end - self.start)
        key = which * big + self.pairs.cost
        upto = np.searchsorted(key, rows_bin * big + np.minimum(room, big - 1), side="right")
        counts = np.maximum(upto - self.start[rows_bin], 0)
        row = np.repeat(np.arange(len(rows_bin)), counts)
        first = np.repeat(self.start[rows_bin], counts)
        p = first + np.arange(len(row)) - np.repeat(np.cumsum(counts) - counts, counts)
        return row, p.astype(np.int64)


@dataclass
class Cores:
    """Every feasible core with its bounds; ``pairs`` per op amp."""

    u: I64
    v: I64
    i3: I64
    i4: I64
    cost: I64  # U1 + RV1 + R3 + R4
    fewest: I64
    c_min: F64
    c_max: F64
    pairs: dict[int, Pairs]
    caps: CapCosts
    bins: dict[int, Bins]
    bounds: dict[int, I64] = field(default_factory=dict)
    floors: dict[int, IntCache] = field(default_factory=dict)
    groups: dict[int, IntCache] = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.u)

    def min_fewest(self) -> int:
        return int(self.fewest.min()) if len(self.u) else MAX_RANGES + 1

    def bound(self, n: int) -> I64:
        """Least cost of a design with n ranges through each core (micro-units)."""
        if n not in self.bounds:
            self.bounds[n] = self._bound(n)
        return self.bounds[n]

    def _bound(self, n: int) -> I64:
        pair_min = np.array(
            [int(self.pairs[u].cost[0]) if len(self.pairs[u]) else INF for u in range(_n(self))],
            dtype=np.int64,
        )
        chain = self.caps.chain(self.c_min, self.c_max, n)
        out = self.cost + pair_min[self.u] + chain
        bad = (self.fewest > n) | (chain >= INF) | (pair_min[self.u] >= INF)
        return np.asarray(np.where(bad, INF, out), dtype=np.int64)

    def select(
        self, model: TunedModel, n: int, theta: int, deadline: float = math.inf
    ) -> tuple[Shared, I64]:
        """Every combination whose cost bound for n ranges is at most ``theta``, with that
        bound. Two sieves, each a lower bound of the cost of any design it passes on: the
        core's (``bound``); per core and bin of k (``Bins``), the chain floor over every k
        of the bin (``bounds.chain_floor``), which with the pair's own cost is the bound
        returned (``tighten`` is the walk's third, one combination at a time). Floors are
        kept, so raising ``theta`` costs only what is new."""
        bound = self.bound(n)
        pick = np.flatnonzero(bound <= theta)
        floors = self.floors.setdefault(n, IntCache())
        parts = []
        for u in np.unique(self.u[pick]):
            bins = self.bins[int(u)]
            mine = pick[self.u[pick] == u]
            chunk_size = max(1, ROWS // max(len(bins), 1))
            for start in range(0, len(mine), chunk_size):
                if time.perf_counter() > deadline:
                    raise TimeUp
                chunk = mine[start : start + chunk_size]
                rows_core = np.repeat(chunk, len(bins))
                rows_bin = np.tile(np.arange(len(bins)), len(chunk))
                crude = self.caps.chain(
                    self.c_min[rows_core] * bins.k_top / bins.k_b[rows_bin],
                    self.c_max[rows_core] * bins.k_bottom / bins.k_a[rows_bin],
                    n,
                )
                base = self.cost[rows_core] + bins.cheapest[rows_bin]
                live = base + crude <= theta
                rows_core, rows_bin, base = rows_core[live], rows_bin[live], base[live]
                if len(rows_core) == 0:
                    continue
                keys = rows_core * len(bins) + rows_bin
                known, floor = floors.get(keys)
                if not known.all():
                    live = known | self._group_sieve(
                        model, n, theta, bins, rows_core, rows_bin, deadline
                    )
                    rows_core, rows_bin, base = rows_core[live], rows_bin[live], base[live]
                    keys, known, floor = keys[live], known[live], floor[live]
                    new = ~known
                    k_a, k_b = bins.k_a[rows_bin[new]], bins.k_b[rows_bin[new]]
                    floor[new] = self.floor(model, rows_core[new], bins, k_a, k_b, n, deadline)
                    floors.put(keys[new], floor[new])
                live = base + floor <= theta
                rows_core, rows_bin, floor = rows_core[live], rows_bin[live], floor[live]
                row, p = bins.expand(rows_bin, theta - self.cost[rows_core] - floor)
                if len(row) == 0:
                    continue
                core = rows_core[row]
                pairs = bins.pairs
                sh = Shared(
                    u=self.u[core],
                    i1=pairs.i1[p],
                    i2=pairs.i2[p],
                    i3=self.i3[core],
                    i4=self.i4[core],
                    v=self.v[core],
                    cost=self.cost[core] + pairs.cost[p],
                )
                ok = stock_ok(model, sh)
                parts.append((sh.take(ok), (sh.cost + floor[row])[ok]))
        if not parts:
            return empty_shared(), np.zeros(0, dtype=np.int64)
        return Shared.concat([x[0] for x in parts]), np.concatenate([x[1] for x in parts])

    def _group_sieve(
        self,
        model: TunedModel,
        n: int,
        theta: int,
        bins: Bins,
        rows_core: I64,
        rows_bin: I64,
        deadline: float,
    ) -> NDArray[np.bool_]:
        """Whether each (core, bin) may still cost ``theta`` or less by its group's chain
        floor (the floor over the group's k, a lower bound of each of its bins')."""
        groups = self.groups.setdefault(n, IntCache())
        g_k_a, g_k_b = bins.group_k()
        keys = rows_core * len(g_k_a) + rows_bin // GROUP
        known, floor = groups.get(keys)
        if not known.all():
            todo, at = np.unique(keys[~known], return_index=True)
            core, group = rows_core[~known][at], rows_bin[~known][at] // GROUP
            found = self.floor(model, core, bins, g_k_a[group], g_k_b[group], n, deadline)
            groups.put(todo, found)
            _, floor = groups.get(keys)
        return np.asarray(self.cost[rows_core] + bins.cheapest[rows_bin] + floor <= theta)

    def floor(
        self, model: TunedModel, rows: I64, bins: Bins, k_a: F64, k_b: F64, n: int, deadline: float
    ) -> I64:
        """The chain floor of each core for k over [k_a, k_b] (``bounds.chain_floor``)."""
        out = np.empty(len(rows), dtype=np.int64)
        for at in range(0, len(rows), FLOOR_BATCH):
            if time.perf_counter() > deadline:
                raise TimeUp
            part = slice(at, at + FLOOR_BATCH)
            kf = bins.factors(k_a[part], k_b[part])
            r = rows[part]
            c = corners(model, self.u[r], self.i3[r], self.i4[r], self.v[r], kf)
            out[part] = chain_floor(model, c, kf.k_lo, kf.k_hi, n)
        return out


def _n(cores: Cores) -> int:
    return max(cores.pairs) + 1 if cores.pairs else 0


def stock_ok(model: TunedModel, sh: Shared) -> NDArray[np.bool_]:
    """Stock for every resistor position a code fills (R1, R2, R3, R4), and the cost cap."""
    res = model.resistors
    boards = model.boards
    codes = [sh.i1, sh.i2, sh.i3, sh.i4]
    ok = np.ones(len(sh), dtype=bool)
    for x in codes:
        uses = sum((x == y) & (y >= 0) for y in codes)
        ok &= (x < 0) | (res.stock[np.maximum(x, 0)] >= boards * uses)
    return ok


def tighten(model: TunedModel, sh: Shared, n: int) -> tuple[I64, NDArray[np.bool_]]:
    """The cost bound of each combination with its exact pair (``INF`` when it cannot make a
    design with n ranges), and per (combination, capacitor) whether that range can count at
    all (``bounds.chain_floor_and_ranges``)."""
    ranges = np.zeros((len(sh), len(model.capacitors)), dtype=bool)
    if len(sh) == 0:
        return np.zeros(0, dtype=np.int64), ranges
    res = model.resistors
    k = res.value[sh.i1] / res.value[sh.i2]
    b, c = shared_bounds(model, sh.u, sh.i3, sh.i4, sh.v, pair_factors(model, sh.i1, sh.i2, k))
    ok = np.flatnonzero(b.feasible & (b.fewest <= n))
    floor = np.full(len(sh), INF, dtype=np.int64)
    if len(ok):
        floor[ok], ranges[ok] = chain_floor_and_ranges(model, c.take(ok), k[ok], k[ok], n)
    out = np.where(floor < INF, sh.cost + floor, INF)
    cap = model.spec.limits.max_cost
    if cap is not None:
        out = np.where(out <= round(cap * 1e6), out, INF)
    return np.asarray(out, dtype=np.int64), ranges


def build_cores(model: TunedModel, deadline: float = math.inf) -> Cores | None:
    """Every core of the model that can make a design at all, with its bounds (None when
    the deadline passes first)."""
    res = model.resistors
    nr = len(res)
    use_u = model.allows("U1", len(model.opamps))
    use_v = model.allows("RV1", len(model.pots))
    use3 = np.flatnonzero(model.allows("R3", nr))
    use4 = np.flatnonzero(model.allows("R4", nr)) if model.divider else np.array([-1])
    r_cost = model.resistor_cost
    pot_cost = model.pot_cost
    pairs = {o.index: model.pairs(o) for o in model.opamps}
    blocks = []
    for o in model.opamps:
        if not use_u[o.index] or len(pairs[o.index]) == 0:
            continue
        if len(model.capacitors) == 0 or not model.pots or not use_v.any():
            continue
        u3 = np.full(len(use3), o.index, dtype=np.int64)
        roots = top_roots(model, u3, use3, window_factors(model, u3))
        top3 = use3[roots.ok]
        if len(top3) == 0:
            continue
        i4_all = np.repeat(use4, len(top3)).astype(np.int64)
        i3_all = np.tile(top3, len(use4)).astype(np.int64)
        at3 = np.tile(np.flatnonzero(roots.ok), len(use4))
        for v in np.flatnonzero(use_v):
            for start in range(0, len(i3_all), CORE_BATCH):
                if time.perf_counter() > deadline:
                    return None
                i3, i4 = i3_all[start : start + CORE_BATCH], i4_all[start : start + CORE_BATCH]
                u = np.full(len(i3), o.index, dtype=np.int64)
                vv = np.full(len(i3), v, dtype=np.int64)
                kf = window_factors(model, u)
                at = at3[start : start + CORE_BATCH]
                top = TopRoots(roots.ok[at], roots.x_hi[at], roots.p1_max[at])
                b, _ = shared_bounds(model, u, i3, i4, vv, kf, top=top)
                keep = b.feasible
                cost = o.cost + pot_cost[v] + r_cost[i3]
                cost = cost + np.where(i4 >= 0, r_cost[np.maximum(i4, 0)], 0)
                blocks.append((u[keep], vv[keep], i3[keep], i4[keep], cost[keep], b, keep))
    caps = CapCosts.of(model.capacitor_cost, model.capacitors.value)
    bins = {o.index: Bins.of(model, o.index, pairs[o.index], o.k_lo, o.k_hi) for o in model.opamps}
    if not blocks:
        z = np.zeros(0, dtype=np.int64)
        f = np.zeros(0)
        return Cores(z, z, z, z, z, z, f, f, pairs, caps, bins)

    def joined(i: int) -> I64:
        return np.concatenate([blk[i] for blk in blocks])

    def bound(name: str) -> Any:
        return np.concatenate([getattr(blk[5], name)[blk[6]] for blk in blocks])

    return Cores(
        u=joined(0),
        v=joined(1),
        i3=joined(2),
        i4=joined(3),
        cost=joined(4),
        fewest=bound("fewest"),
        c_min=bound("c_min"),
        c_max=bound("c_max"),
        pairs=pairs,
        caps=caps,
        bins=bins,
    )
