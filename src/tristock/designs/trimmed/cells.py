"""Cells (U1, R1, R2, C1, RV1) of the trimmed search: R3 windows and resolution lower bounds.

A row adds R3 to a cell. Everything here only leaves out rows that provably cannot be
accepted (``trim.rows``) or orders cells by a bound no row of theirs can beat; rows are then
decided by the full model. Notation (SI units): k = R1/R2, R_eff = R3 + α·RV (α the wiper),
P = k·R_eff·C1, T_t = 1/f_target, a = VH - Ve and b = VL + Ve the integrator's drives
(Ve = Vos1 + Ib1·R_eff), span = VH + VL = a + b, m the wiper margin.

**R3 windows.** P0 in [P_lo, P_hi] (``trim.pairs``) with α0 in [m, 1 - m] needs
P_lo/(k·C1) - (1 - m)·RV ≤ R3 ≤ P_hi/(k·C1) - m·RV. A slow corner (``trim.probes``) reaches the
target at wiper m only when k_s·(R3·f3 + m·RV·f_RV)·C1·f_C ≤ P_slow_max (the factors being the
corner's tolerance and temperature factors; f3 at least its smallest value over the eligible
R3), and a fast corner stays at or below it at 1 - m only when
k_f·(R3·f3 + (1 - m)·RV·f_RV)·C1·f_C ≥ P_fast_min (f3 at most its largest). Each gives one end
of R3. A cell whose window holds no eligible R3, or whose cheapest row is over
``max_cost``, has no row that can be accepted. Every end is linear in RV, so for each
(pair, C1) the trimmers that can leave a non-empty window form one range of values
(``Entries``: each condition taken with the trimmers' most favourable factors).

**Resolution bound.** The resolution of a row is RV·(dT/dR_eff)/T at α0, where T = T_t, and
dT/dR_eff = k·C1·∂T/∂P + Ib1·∂T/∂Ve. From the period of ``tristock.circuits.looptiming``,
T = span·(span·(P + k/ωt)/(a·b) + d_r/a + d_f/b), d = td + G/λ + τi (``search.bounds``):

- ∂T/∂P ≥ span²/(a·b): the delays d_r, d_f only grow with P (the integrator's lag τi rises,
  and the edge's mean time G with it, since μ ∝ 1/RC' falls: property G1);
- |∂T/∂Ve| ≤ T·(1/a + 1/b) = T·span/(a·b): Ve moves a and b by ∓1, and -a·∂T/∂a ≤ T because
  the terms of T are span²·(P + k/ωt)/(a·b), span·d_r/a and span·d_f/b, the first two
  scaling as 1/a and the last moving with a only through d_f's edge, μ_f ∝ a, where
  -μ·∂G/∂μ ≤ G (G1 and G2: μ·G does not fall); likewise for b.

Both rest on G1 and G2, which ``search.bounds`` claims only where the edge's scaled level is
at least ``EDGE_LEVEL_MIN`` (``claimed``); elsewhere the bound is 0.

So res ≥ RV·span·(k·C1·span/T_t - |Ib1|)/(a·b) ≥ RV·X with
X = span·(k·C1·span/T_t - |Ib1|)/ab_max, ab_max the largest a·b over the nominal Ve range
(a·b is concave in Ve, largest where a = b): ``res_lb`` = max(0, RV·X), valid for every R3.
Each evaluated row is held to it (``trim.rows``).

**Bands.** Cells are listed a band of ``res_lb`` at a time, [θ0, θ1), each cell in exactly
one band; every cell of a later band has ``res_lb`` ≥ θ1.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from tristock.designs.trimmed.context import F64, I64, TrimContext
from tristock.designs.trimmed.pairs import EDGE, Pairs
from tristock.designs.trimmed.probes import FAST_PROBES, SLOW_PROBES, factor, temperature_ends

#: (pair, C1) entries per vectorised step.
CHUNK = 1 << 17


@dataclass
class Cells:
    """Cells with a non-empty R3 window [lo, hi) (indices into the resistor table), sorted by
    the resolution bound ``res_lb``."""

    u: I64
    i1: I64
    i2: I64
    j: I64
    v: I64
    lo: I64
    hi: I64
    res_lb: F64

    def __len__(self) -> int:
        return len(self.u)


def no_cells() -> Cells:
    z = np.zeros(0, dtype=np.int64)
    return Cells(z, z, z, z, z, z, z, np.zeros(0))


@dataclass
class Entries:
    """(pair n, C1 j) with the trimmers that may give a cell: positions [v_lo, v_hi) in the
    eligible trimmers by value, and X of ``res_lb`` = max(0, RV·X)."""

    n: I64
    j: I64
    x: F64
    v_lo: I64
    v_hi: I64


class _Factors:
    """Corner factors (``trim.probes.factor``) of C1 and RV1 and the extreme R3 and RV1
    factors, at each temperature end."""

    def __init__(self, ctx: TrimContext, vs: I64, r3_ok: np.ndarray) -> None:
        res, cap, pots = ctx.model.resistors, ctx.model.capacitors, ctx.pots
        self.ends = temperature_ends(ctx.model)
        slow, fast = SLOW_PROBES[0], FAST_PROBES[0]
        band = cap.extra_band
        self.c_slow = {t: factor(cap.tol, slow.zc, cap.tempco, t, band) for t in self.ends}
        self.c_fast = {t: factor(cap.tol, fast.zc, cap.tempco, t, band) for t in self.ends}
        self.rv_slow = {t: factor(pots.tol, slow.zrv, pots.tempco, t) for t in self.ends}
        self.rv_fast = {t: factor(pots.tol, fast.zrv, pots.tempco, t) for t in self.ends}
        self.rv_slow_min = {t: float(self.rv_slow[t][vs].min()) for t in self.ends}
        self.rv_fast_max = {t: float(self.rv_fast[t][vs].max()) for t in self.ends}
        self.r3_slow_min = {
            t: float(factor(res.tol, slow.z3, res.tempco, t)[r3_ok].min()) for t in self.ends
        }
        self.r3_fast_max = {
            t: float(factor(res.tol, fast.z3, res.tempco, t)[r3_ok].max()) for t in self.ends
        }

    def pick(self, table: dict[float, F64], temp: F64, idx: I64) -> F64:
        out = np.empty(len(idx))
        for t in self.ends:
            at = temp == t
            out[at] = table[t][idx[at]]
        return out

    def scalar(self, table: dict[float, float], temp: F64) -> F64:
        out = np.empty(len(temp))
        for t in self.ends:
            out[temp == t] = table[t]
        return out


class CellSource:
    """The cells of one context, listed a band of the resolution bound at a time."""

    def __init__(self, ctx: TrimContext, pairs: Pairs, deadline: float) -> None:
        self.ctx, self.pairs = ctx, pairs
        model = ctx.model
        res = model.resistors
        self.js = np.flatnonzero(model.allows("C1", len(model.capacitors))).astype(np.int64)
        self.vs = np.flatnonzero(ctx.pot_mask()).astype(np.int64)  # eligible, by value
        self.rv = ctx.pots.value[self.vs]
        self.r3_ok = model.allows("R3", len(res))
        self.r3_count = np.concatenate([[0], np.cumsum(self.r3_ok)]).astype(np.int64)
        self.complete = True
        empty = Entries(*(np.zeros(0, dtype=t) for t in (np.int64, np.int64, float, np.int64,
                                                          np.int64)))  # fmt: skip
        self.entries = empty
        if len(pairs) == 0 or len(self.js) == 0 or len(self.vs) == 0 or not self.r3_ok.any():
            return
        self.r_min = float(res.value[self.r3_ok].min())
        self.r_max = float(res.value[self.r3_ok].max())
        self.r3_cost = float(res.cost[self.r3_ok].min())
        self.factors = _Factors(ctx, self.vs, self.r3_ok)
        found = []
        step = max(CHUNK // len(self.js), 1)
        for start in range(0, len(pairs), step):
            if time.perf_counter() > deadline:
                self.complete = False
                break
            sel = np.arange(start, min(start + step, len(pairs)), dtype=np.int64)
            found.append(self._entries(np.repeat(sel, len(self.js)), np.tile(self.js, len(sel))))
        if found:
            self.entries = Entries(
                *(
                    np.concatenate([getattr(e, f) for e in found])
                    for f in Entries.__dataclass_fields__
                )
            )

    def _entries(self, n: I64, j: I64) -> Entries:
        """The trimmer range of each (pair, C1): the module docstring's window conditions,
        linear in RV, each with the trimmers' most favourable factor."""
        p, f = self.pairs, self.factors
        m = self.ctx.margin
        c = self.ctx.model.capacitors.value[j]
        kc = p.k[n] * c
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            a_n, b_n = p.p_lo[n] / kc, p.p_hi[n] / kc
            b_s = p.p_slow_max[n] / (p.k_slow[n] * c * f.pick(f.c_slow, p.t_slow[n], j))
            a_f = p.p_fast_min[n] / (p.k_fast[n] * c * f.pick(f.c_fast, p.t_fast[n], j))
            g_s = f.scalar(f.r3_slow_min, p.t_slow[n])
            g_f = f.scalar(f.r3_fast_max, p.t_fast[n])
            rv_s = f.scalar(f.rv_slow_min, p.t_slow[n])
            rv_f = f.scalar(f.rv_fast_max, p.t_fast[n])
            lower = np.maximum(0.0, (a_n - b_n) / (1 - 2 * m))
            lower = np.maximum(lower, (a_n - self.r_max) / (1 - m))
            bad = np.zeros(len(n), dtype=bool)
            # (rhs, coefficient): coefficient·RV >= rhs, the coefficient at its largest
            for rhs, coef in (
                (a_n - b_s / g_s, (1 - m) - m * rv_s / g_s),  # nominal low end <= slow high
                (a_f / g_f - b_n, (1 - m) * rv_f / g_f - m),  # fast low end <= nominal high
                (a_f / g_f - b_s / g_s, (1 - m) * rv_f / g_f - m * rv_s / g_s),  # fast <= slow
                (a_f - self.r_max * g_f, (1 - m) * rv_f),  # fast low end <= largest R3
            ):
                need = rhs > 0
                bad |= need & ~(coef > 0)
                lower = np.where(need & (coef > 0), np.maximum(lower, rhs / coef), lower)
            if m > 0:
                upper = np.minimum((b_n - self.r_min) / m, (b_s - self.r_min * g_s) / (m * rv_s))
            else:
                upper = np.full(len(n), np.inf)
                bad |= (b_n < self.r_min) | (b_s < self.r_min * g_s)
            x = p.span[n] * (kc * p.span[n] / self.ctx.target_period_s - p.bias[n]) / p.ab_max[n]
        v_lo = np.searchsorted(self.rv, np.nan_to_num(lower * (1 - EDGE), nan=np.inf), side="left")
        v_hi = np.searchsorted(self.rv, np.nan_to_num(upper * (1 + EDGE), nan=-np.inf), "right")
        keep = ~bad & (v_lo < v_hi)
        return Entries(n[keep], j[keep], x[keep], v_lo[keep].astype(np.int64),
                       v_hi[keep].astype(np.int64))  # fmt: skip

    def next_bound(self, theta: float) -> float:
        """The smallest ``res_lb`` ≥ ``theta`` of any cell of the entries (inf if none): every
        cell not in a band below ``theta`` has at least this."""
        e = self.entries
        if len(e.n) == 0:
            return math.inf
        pos = e.x > 0
        with np.errstate(divide="ignore"):
            idx = np.searchsorted(self.rv, theta / np.where(pos, e.x, 1.0), side="left")
        idx = np.maximum(idx, e.v_lo)
        last = len(self.rv) - 1
        low = self.rv[np.minimum(idx, last)] * e.x < theta  # rounding at the edge: next value
        idx = np.where(low, np.searchsorted(self.rv, self.rv[np.minimum(idx, last)], "right"), idx)
        ok = (idx < e.v_hi) & pos
        if theta <= 0:
            ok |= ~pos  # res_lb = 0 when X ≤ 0
        if not ok.any():
            return math.inf
        r = np.where(pos, self.rv[np.minimum(idx, last)] * e.x, 0.0)
        return max(float(r[ok].min()), theta)

    def band(self, lo: float, hi: float) -> Cells:
        """Every cell with ``res_lb`` in [lo, hi) and a non-empty R3 window, sorted by
        ``res_lb``."""
        e = self.entries
        if len(e.n) == 0:
            return no_cells()
        pos = e.x > 0
        with np.errstate(divide="ignore"):
            safe = np.where(pos, e.x, 1.0)
            a = np.searchsorted(self.rv, lo / safe, side="left") - 1
            b = np.searchsorted(self.rv, hi / safe, side="right") + 1
        a = np.where(pos, a, e.v_lo if lo <= 0 < hi else e.v_hi)
        b = np.where(pos, b, e.v_hi)
        a, b = np.maximum(a, e.v_lo), np.minimum(b, e.v_hi)
        counts = np.maximum(b - a, 0)
        which = np.repeat(np.arange(len(counts)), counts)
        pos_v = (
            np.repeat(a, counts)
            + np.arange(len(which))
            - np.repeat(np.cumsum(counts) - counts, counts)
        )
        res_lb = np.maximum(0.0, self.rv[pos_v] * e.x[which])
        inside = (res_lb >= lo) & (res_lb < hi)
        which, pos_v, res_lb = which[inside], pos_v[inside], res_lb[inside]
        return self._cells(e.n[which], e.j[which], self.vs[pos_v], res_lb)

    def _cells(self, n: I64, j: I64, v: I64, res_lb: F64) -> Cells:
        """The exact R3 window of each cell (module docstring); the non-empty ones, sorted."""
        p, f = self.pairs, self.factors
        ctx = self.ctx
        res, cap, pots = ctx.model.resistors, ctx.model.capacitors, ctx.pots
        m = ctx.margin
        k, c, rv = p.k[n], cap.value[j], pots.value[v]
        with np.errstate(divide="ignore", invalid="ignore"):
            lo_n = p.p_lo[n] / (k * c) - (1 - m) * rv
            hi_n = p.p_hi[n] / (k * c) - m * rv
            c_s = f.pick(f.c_slow, p.t_slow[n], j)
            rv_s = f.pick(f.rv_slow, p.t_slow[n], v)
            hi_s = (p.p_slow_max[n] / (p.k_slow[n] * c * c_s) - m * rv * rv_s) / f.scalar(
                f.r3_slow_min, p.t_slow[n]
            )
            c_f = f.pick(f.c_fast, p.t_fast[n], j)
            rv_f = f.pick(f.rv_fast, p.t_fast[n], v)
            lo_f = (p.p_fast_min[n] / (p.k_fast[n] * c * c_f) - (1 - m) * rv * rv_f) / f.scalar(
                f.r3_fast_max, p.t_fast[n]
            )
        lo_r = np.maximum(lo_n, lo_f) * (1 - EDGE)
        hi_r = np.minimum(hi_n, hi_s) * (1 + EDGE)
        lo = np.searchsorted(res.value, np.nan_to_num(lo_r, nan=np.inf), side="left")
        hi = np.searchsorted(res.value, np.nan_to_num(hi_r, nan=-np.inf), side="right")
        keep = self.r3_count[np.maximum(hi, lo)] - self.r3_count[lo] > 0
        max_cost = ctx.spec.limits.max_cost
        if max_cost is not None:
            keep &= p.cost[n] + cap.cost[j] + pots.cost[v] + self.r3_cost <= max_cost + 1e-12
        w = np.flatnonzero(keep)
        order = w[np.argsort(res_lb[w], kind="stable")]
        n = n[order]
        return Cells(p.u[n], p.i1[n], p.i2[n], j[order], v[order], lo[order].astype(np.int64),
                     hi[order].astype(np.int64), res_lb[order])  # fmt: skip


def expand(ctx: TrimContext, cells: Cells, start: int, stop: int) -> tuple[I64, ...]:
    """Rows (u, i1, i2, i3, j, v, cell) of cells[start:stop], eligible R3 only."""
    r3_ok = ctx.model.allows("R3", len(ctx.model.resistors))
    lo, hi = cells.lo[start:stop], cells.hi[start:stop]
    counts = np.maximum(hi - lo, 0)
    cell = np.repeat(np.arange(start, stop, dtype=np.int64), counts)
    offsets = np.repeat(np.cumsum(counts) - counts, counts)
    i3 = (np.repeat(lo, counts) + np.arange(len(cell)) - offsets).astype(np.int64)
    keep = r3_ok[i3]
    cell, i3 = cell[keep], i3[keep]
    return cells.u[cell], cells.i1[cell], cells.i2[cell], i3, cells.j[cell], cells.v[cell], cell
