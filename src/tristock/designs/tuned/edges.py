"""The comparator edge's mean time as the tuned bounds use it: tabulated envelopes per op amp.

The loop's period and overshoots (``tristock.looptiming``, the core ``circuit.predict``
evaluates) take each comparator edge's centroid c = td + G(W; μ, D)/λ and overshoot time
o = td + G(L0; μ, D)/λ (``transition.switch_times``) with λ = 2π·GBW·k/(1 + k) (1/s),
W = λ·span/SR the whole edge, L0 = λ·drive/SR the part up to the integrator's neutral level,
D = λ·td and μ = drive/(SR·Q), Q = k·RC' = P + k/ωt (P = k·RC, s; ωt = 2π·GBW of the
integrator, the same part's). G is the interpolated table ``transition.scaled_mean_time``.
Its properties the tuned bounds rest on, each checked on that function (the one the model
evaluates) on a grid three times finer than its table in every axis and past its ends:

- (G1) G does not rise with μ, (G2) μ·G does not fall with μ, (G3) G does not fall with L,
  at scaled levels L ≥ ``EDGE_LEVEL_MIN`` (``search.bounds``, tests/test_search_bounds.py);
- (G4) at a fixed μ, G(λ·w; μ, λ·t)/λ does not rise with λ: a comparator with more loop
  gain-bandwidth (here: a larger k) switches no later, in seconds; on every ray whose level
  is at least ``EDGE_LEVEL_MIN`` where it starts (tests/test_tuning_bounds.py);
- (G0) G(L) ≥ L/2 everywhere: the edge is never ahead of a pure slew from the end of the
  delay (its rate is SR·tanh(·) ≤ SR), so c ≥ td + span/(2·SR) and o ≥ td + drive/(2·SR);
- (G3r) G(L) ≤ (1 + ``OVERSHOOT_EXCESS``)·G(W) for every L ≤ W, everywhere: (G3) up to the
  table's ripple at the smallest levels, so o ≤ td + (1 + δ)·(c - td) ≤ (1 + δ)·c.

G1, G2 and G4 hold where the edge is long enough against its build-up (W ≥ EDGE_LEVEL_MIN);
G0 and G3r hold everywhere.

``EdgeTables`` holds, per op amp at one corner of the spread box (its span, slew and delay),
tables of the edge time g(μ) = G(λ·V/SR; μ, λ·td)/λ on a grid of μ, for V = span (the
centroid's level W) or a drive V (an overshoot's level L0), at λ = λ(k_i) for k on a
geometric grid k_i (step ``K_STEP`` in ln k) and drives on a geometric grid (step
``V_STEP``), built as rows need them. For rows whose k lies in [k_a, k_b], the upper
envelope uses the grid's k at or below k_a and the drive at or above the row's, the lower one
the k at or above k_b and the drive at or below; by (G4), (G3) and (G1), for every such k and
every μ in a grid cell [μj, μj+1]:

    upper:  g(μ) ≤ min(gj, μj+1·gj+1/μ)        (G1 at μj; G2 at μj+1)
    lower:  g(μ) ≥ max(gj+1, μj·gj/μ)          (G1 at μj+1; G2 at μj)

For an overshoot's table the chain runs g(k, V) ≤ g(k_i, V) (G4) ≤ g(k_i, V') (G3, V' the grid's
drive at or above V) and g(k, V) ≥ g(k_j, V) ≥ g(k_j, V'') likewise, so the level λ(k_i)·V/SR
(the smallest along both chains) must be at least EDGE_LEVEL_MIN as well as every table's.
Both envelopes are continuous, do not rise with μ and μ times them does not fall: the same
shape as g, so every monotonicity derived from G1 and G2 holds for bounds built from them.
Above the table's top μ (where the model clamps it) g is exact; below the grid the upper
envelope is infinite and the lower one the grid's first value (G1). Rows are claimed where
the level of every table they use is at least EDGE_LEVEL_MIN and each table shows G1 and G2
on its own grid; elsewhere the upper envelope is infinite and the lower one the pure slew
V/(2·SR) (G0). An ideal comparator (GBW = inf) has the linear slew, g = V/(2·SR), exactly.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.edgetable import LN_MU
from tristock.circuits.transition import EDGE_LEVEL_MIN, scaled_mean_time

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
B = NDArray[np.bool_]

#: δ of (G3r): the overshoot's edge time is at most 1 + δ times the centroid's.
OVERSHOOT_EXCESS = 0.02
#: The envelope grid: ln μ from LN_MU_LOW to the model's clamp in steps of GRID_STEP.
LN_MU_LOW = -30.0
GRID_STEP = 0.05
LN_GRID = np.append(np.arange(LN_MU_LOW, LN_MU[-1], GRID_STEP), LN_MU[-1])
MU_GRID = np.exp(LN_GRID)
#: Rounding allowed when a table is checked for G1 and G2 on its grid (relative).
ROUNDING = 1e-9
#: Slack of the envelopes (relative) for μ's cell found through a rounded logarithm: a μ
#: within about 1e-14 of a cell's end may be placed in its neighbour.
CELL_ROUNDING = 1e-12
#: Answers of ``EdgeTables.ends`` kept (arrays are never changed in place here).
RECENT = 8
#: The k grid of the tables: ln k from LN_K_LOW in steps of K_STEP, K_CELLS points (k up to
#: about 1.3, past any k = R1/R2 a design can use).
LN_K_LOW = math.log(1e-4)
K_STEP = 0.01
K_CELLS = 950
#: The drive grid of the overshoots' tables: ln V from LN_V_LOW in steps of V_STEP (1 mV
#: to about 1.6 kV).
LN_V_LOW = math.log(1e-3)
V_STEP = 0.01
V_CELLS = 1400


def edge_rate(k: F64 | float, gbw: F64 | float) -> F64:
    """λ = 2π·GBW·k/(1 + k) (1/s): the comparator's regeneration rate."""
    return np.asarray(2.0 * math.pi * np.asarray(gbw) * np.asarray(k) / (1.0 + np.asarray(k)))


def integrator_rate(gbw: F64 | float) -> F64:
    """ωt = 2π·GBW (rad/s) of the integrator: the same part's GBW (inf: ideal)."""
    return np.asarray(2.0 * math.pi * np.asarray(gbw, dtype=float))


def lag_peak(eps_max: F64) -> F64:
    """max of ε/(1 + ε)² over 0 < ε ≤ eps_max: τi/RC' (the lag's part of an overshoot per
    volt of drive) peaks at ε = 1 (1/4)."""
    e = np.minimum(np.asarray(eps_max, dtype=float), 1.0)
    return np.asarray(np.where(e > 0, e / (1.0 + e) ** 2, 0.0))


class EdgeTables:
    """Per op amp at one corner: span (V), slew (V/s), delay (s) and the comparator's GBW
    (Hz, also the integrator's); the envelopes of g(μ) (s) on the k and drive grids, built
    on demand (module docstring). ``drive`` None everywhere below means the span (the
    centroid's edge time), a value the overshoot's for that drive (V)."""

    def __init__(self, span: F64, slew: F64, delay: F64, gbw: F64) -> None:
        self.span, self.slew, self.delay, self.gbw = (
            np.asarray(x, dtype=float) for x in (span, slew, delay, gbw)
        )
        self.ideal = ~np.isfinite(self.gbw)
        self._keys = np.zeros(0, dtype=np.int64)  # sorted
        self._rows = np.zeros(0, dtype=np.int64)  # the table of each key
        self._values = np.zeros((0, len(MU_GRID)))
        self._ok = np.zeros(0, dtype=bool)
        self._recent: list[tuple[tuple[object, ...], Ends]] = []

    @property
    def wt(self) -> F64:
        return integrator_rate(self.gbw)

    def linear(self, u: I64, drive: F64 | None = None) -> F64:
        """V/(2·SR): the pure slew's share of the edge time (s)."""
        volts = self.span[u] if drive is None else drive
        return np.asarray(volts / (2.0 * self.slew[u]))

    def _tables(self, u: I64, kc: I64, vc: I64) -> I64:
        """Row of the table of (op amp, k cell, drive cell; V_CELLS: the span) for every
        element, building the missing ones (one batch of ``scaled_mean_time``)."""
        u, kc, vc = np.broadcast_arrays(np.asarray(u, dtype=np.int64), kc, vc)
        keys = (u * K_CELLS + kc) * (V_CELLS + 1) + vc
        flat = keys.ravel()
        pos = np.searchsorted(self._keys, flat)
        if len(self._keys):
            found = self._keys[np.minimum(pos, len(self._keys) - 1)] == flat
        else:
            found = np.zeros(len(flat), dtype=bool)
        if not found.all():
            self._build(np.unique(flat[~found]))
            pos = np.searchsorted(self._keys, flat)
        return np.asarray(self._rows[pos].reshape(keys.shape))

    def _build(self, keys: I64) -> None:
        vc = keys % (V_CELLS + 1)
        kc = (keys // (V_CELLS + 1)) % K_CELLS
        opamp = keys // ((V_CELLS + 1) * K_CELLS)
        values = np.zeros((len(keys), len(MU_GRID)))
        ok = np.zeros(len(keys), dtype=bool)
        live = ~self.ideal[opamp]
        if live.any():
            uu = opamp[live]
            lam = edge_rate(np.exp(LN_K_LOW + kc[live] * K_STEP), self.gbw[uu])
            volts = np.where(
                vc[live] == V_CELLS, self.span[uu], np.exp(LN_V_LOW + vc[live] * V_STEP)
            )
            level = lam * volts / self.slew[uu]
            g = scaled_mean_time(MU_GRID[None, :], (lam * self.delay[uu])[:, None], level[:, None])
            g = g / lam[:, None]
            steps = np.diff(g, axis=1)
            scaled = np.diff(g * MU_GRID, axis=1)
            tol = ROUNDING * np.maximum(np.abs(g[:, :-1]), 1e-300)
            mono = np.all(steps <= tol, axis=1) & np.all(scaled >= -tol * MU_GRID[:-1], axis=1)
            values[live] = g
            ok[live] = mono & (level >= EDGE_LEVEL_MIN)
        rows = np.arange(len(self._ok), len(self._ok) + len(keys), dtype=np.int64)
        self._values = np.concatenate([self._values, values])
        self._ok = np.concatenate([self._ok, ok])
        all_keys = np.concatenate([self._keys, keys])
        order = np.argsort(all_keys, kind="stable")
        self._keys = all_keys[order]
        self._rows = np.concatenate([self._rows, rows])[order]

    def ends(self, u: I64, k_a: F64, k_b: F64, drive: F64 | None = None) -> Ends:
        """The tables of the upper envelope (k at or below k_a, drive at or above) and of the
        lower one (k at or above k_b, drive at or below) for rows with k in [k_a, k_b], and
        whether the envelopes are claimed (module docstring). The last few answers are kept
        for the same argument objects (the bounds ask again for the same rows at other P)."""
        for known, found in self._recent:
            if all(x is y for x, y in zip(known, (u, k_a, k_b, drive), strict=True)):
                return found
        found = self._ends(u, k_a, k_b, drive)
        self._recent = [((u, k_a, k_b, drive), found), *self._recent[: RECENT - 1]]
        return found

    def _ends(self, u: I64, k_a: F64, k_b: F64, drive: F64 | None) -> Ends:
        u = np.asarray(u, dtype=np.int64)
        if drive is None:
            v_up = v_down = np.full(np.shape(u), V_CELLS, dtype=np.int64)
        else:
            v_up, v_down = v_cell(drive, up=True), v_cell(drive, up=False)
        k_low = k_cell(k_a, up=False)
        high = self._tables(u, k_low, v_up)
        low = self._tables(u, k_cell(k_b, up=True), v_down)
        ok = self._ok[high] & self._ok[low] & ~self.ideal[u]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            ok &= (np.log(k_a) >= LN_K_LOW) & (np.log(k_b) <= LN_K_LOW + (K_CELLS - 1) * K_STEP)
            if drive is not None:
                ln_v = np.log(drive)
                ok &= (ln_v >= LN_V_LOW) & (ln_v <= LN_V_LOW + (V_CELLS - 1) * V_STEP)
                # G4 and G3 are used from the row's own drive at the smallest rate, which
                # may lie just below the tables' levels: it must be claimed too.
                lam = edge_rate(np.exp(LN_K_LOW + k_low * K_STEP), self.gbw[u])
                ok &= lam * drive / self.slew[u] >= EDGE_LEVEL_MIN
        return Ends(high, low, np.asarray(ok), u, self.linear(u, drive), self.ideal[u])

    def claimed(self, u: I64, k_a: F64, k_b: F64, drive: F64 | None = None) -> B:
        """Whether the envelopes for k in [k_a, k_b] rest on G1-G4 (module docstring)."""
        return self.ends(u, k_a, k_b, drive).ok

    def _cell(self, table: I64, mu: F64) -> tuple[F64, F64, I64, F64]:
        """g at both ends of μ's grid cell in ``table`` (s), the cell, and μ clamped to the
        grid (where the model clamps it too at the top)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            x = (np.log(mu) - LN_MU_LOW) / GRID_STEP
        j = np.fmin(np.fmax(np.floor(x), 0.0), len(MU_GRID) - 2).astype(np.intp)
        flat = table * len(MU_GRID) + j
        values = self._values.reshape(-1)
        mu_c = np.fmin(np.fmax(mu, MU_GRID[0]), MU_GRID[-1])
        return values[flat], values[flat + 1], j, mu_c

    def hi_at(self, e: Ends, mu: F64) -> F64:
        """Upper envelope of the edge time g (s) at μ for the rows of ``e``."""
        mu = np.asarray(mu, dtype=float)
        g0, g1, j, mu_c = self._cell(e.high, mu)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            val = np.minimum(g0, MU_GRID[j + 1] * g1 / mu_c) * (1 + CELL_ROUNDING)
        val = np.where(~(mu >= MU_GRID[0]) | ~e.ok, np.inf, val)  # NaN μ too
        return np.asarray(np.where(e.ideal, e.linear, val))

    def lo_at(self, e: Ends, mu: F64) -> F64:
        """Lower envelope of the edge time g (s) at μ for the rows of ``e``."""
        mu = np.asarray(mu, dtype=float)
        g0, g1, j, mu_c = self._cell(e.low, mu)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            val = np.maximum(g1, MU_GRID[j] * g0 / mu_c) * (1 - CELL_ROUNDING)
        val = np.where(np.isnan(mu) | ~e.ok, 0.0, val)
        return np.asarray(np.maximum(val, e.linear))  # (G0)

    def hi(self, u: I64, k_a: F64, k_b: F64, mu: F64, drive: F64 | None = None) -> F64:
        """Upper envelope of the edge time g (s) at μ, for every k in [k_a, k_b]."""
        return self.hi_at(self.ends(u, k_a, k_b, drive), mu)

    def lo(self, u: I64, k_a: F64, k_b: F64, mu: F64, drive: F64 | None = None) -> F64:
        """Lower envelope of the edge time g (s) at μ, for every k in [k_a, k_b]."""
        return self.lo_at(self.ends(u, k_a, k_b, drive), mu)


class Ends(NamedTuple):
    """What ``EdgeTables.ends`` finds for a set of rows: the upper and the lower envelope's
    tables, whether they are claimed, the rows' op amps, their pure-slew time V/(2·SR) (s)
    and whether their comparator is ideal."""

    high: I64
    low: I64
    ok: B
    u: I64
    linear: F64
    ideal: B


def v_cell(drive: F64, *, up: bool) -> I64:
    """Index of the drive grid's point at or below the drive (``up``: at or above)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        x = (np.log(np.asarray(drive, dtype=float)) - LN_V_LOW) / V_STEP
    i = np.ceil(x + 1e-9) if up else np.floor(x - 1e-9)
    return np.asarray(np.fmin(np.fmax(i, 0), V_CELLS - 1), dtype=np.int64)  # NaN: 0


def k_cell(k: F64, *, up: bool) -> I64:
    """Index of the k grid's point at or below k (``up``: at or above), clipped to the grid."""
    with np.errstate(divide="ignore", invalid="ignore"):
        x = (np.log(np.asarray(k, dtype=float)) - LN_K_LOW) / K_STEP
    # rounding of the logarithm is taken outwards (a farther grid point is still valid, G4)
    i = np.ceil(x + 1e-9) if up else np.floor(x - 1e-9)
    return np.asarray(np.fmin(np.fmax(i, 0), K_CELLS - 1), dtype=np.int64)  # NaN: 0
