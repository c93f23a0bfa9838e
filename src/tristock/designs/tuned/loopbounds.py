"""Bounds of the full model's period, overshoots and timing share at one corner of the box,
over a range of P and of k, from the edge tables (``tuning.edges``).

Notation as ``tristock.looptiming`` (volts from the reference, seconds): span = VH + VL, a the
falling ramp's drive, b the rising one's, P = k·RC, Q = k·RC' = P + k/ωt, ε = k/(ωt·P),
τi = P/(ωt·P + k) the integrator's lag, A = span²/(a·b). The model's period is

    T = A·Q + span·(d_r/a + d_f/b),  d = td + g(μ) + τi,  μ_r = b/(SR·Q), μ_f = a/(SR·Q),

g the edge time G(W; μ, D)/λ of ``edges``, and T_i = A·P its ideal part; so T = A·P + H(P)
with H = A·k/ωt + span·(d_r/a + d_f/b) = T - T_i, the op amps' share of the period.

Facts, for fixed drives (each from the model's structure and the edge's properties):

- (H1) H does not fall with P: Q rises, so μ falls and g rises (G1), and τi rises;
- (H2) H/P does not rise with P: (A·k/ωt)/P and τi/P = 1/(ωt·P + k) fall; g/Q =
  (SR/drive)·μ·g does not rise as μ falls (G2) and Q/P = 1 + k/(ωt·P) falls. So T/P does not
  rise and the share H/T does not rise with P;
- over k in [k_a, k_b] at a fixed P: A·Q and μ's Q lie between their values at the ends, τi
  falls with k, and g is at most the upper envelope at λ(k_a) and at least the lower one at
  λ(k_b) (G4). ``slow_part`` takes each term at its end (upper: Q at k_b, τi at k_a, g_hi;
  lower: the other ends), so H_lo ≤ H ≤ H_hi for every k, and both keep H1 and H2 (the
  envelopes have G1's and G2's shape);
- overshoots: the top one is (b·(o_r + τi) - A_r)/RC' with 0 ≤ A_r ≤ b·τi
  (``looptiming``), so it lies between b·o_r/RC' and b·o_r/RC' + b·ε/(1 + ε)²; and
  b·o_r/RC' = k·(b/Q)·o_r, o_r = td + g at the overshoot's level λ·b/SR (its own table).

Where the tables are not claimed (``EdgeTables.claimed``) the upper bounds are infinite and
the lower ones take the edge as a pure slew (G0): valid, they only prune less.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.designs.tuned.edges import EdgeTables, lag_peak

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]


@dataclass(frozen=True)
class CornerRows:
    """Rows at one corner of the box: their op amps' tables, indices and drives (V). Every
    function below takes P and the k range per row, or P as a matrix (rows first) with the
    k range per row."""

    tables: EdgeTables
    u: I64
    a: F64
    b: F64

    @property
    def span(self) -> F64:
        return np.asarray(self.tables.span[self.u])

    @property
    def slew(self) -> F64:
        return np.asarray(self.tables.slew[self.u])

    @property
    def delay(self) -> F64:
        return np.asarray(self.tables.delay[self.u])

    @property
    def wt(self) -> F64:
        return np.asarray(self.tables.wt[self.u])

    @property
    def ramp(self) -> F64:
        """A = span²/(a·b): dT/dP of the ideal part (1)."""
        return np.asarray(self.span**2 / (self.a * self.b))

    def take(self, sel: I64 | NDArray[np.bool_]) -> CornerRows:
        return CornerRows(self.tables, self.u[sel], self.a[sel], self.b[sel])


def rowwise(c: CornerRows, p: F64, *ks: F64) -> tuple[CornerRows, F64, list[F64]]:
    """For P of shape (rows, columns...): the rows' values shaped to broadcast against it
    (every function here then works on a matrix of P, one table look-up per row)."""
    p = np.asarray(p, dtype=float)
    extra = p.ndim - np.ndim(c.u)
    if extra <= 0:
        return c, p, [np.asarray(k, dtype=float) for k in ks]

    def shaped(x: NDArray[np.generic]) -> NDArray[np.generic]:
        x = np.asarray(x)
        return x.reshape(x.shape + (1,) * extra)

    rows = CornerRows(
        c.tables, np.asarray(shaped(c.u), dtype=np.int64), np.asarray(shaped(c.a), dtype=float),
        np.asarray(shaped(c.b), dtype=float),
    )  # fmt: skip
    return rows, p, [np.asarray(shaped(np.asarray(k, dtype=float)), dtype=float) for k in ks]


def slow_part(c: CornerRows, p: F64, k_a: F64, k_b: F64, *, upper: bool) -> F64:
    """H_hi (``upper``) or H_lo at P for every k in [k_a, k_b] (module docstring), s;
    elementwise over the rows (P, k_a and k_b per row)."""
    c, p, (k_a, k_b) = rowwise(c, p, k_a, k_b)
    wt, span, a, b, sr, td = c.wt, c.span, c.a, c.b, c.slew, c.delay
    k_q, k_t = (k_b, k_a) if upper else (k_a, k_b)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        q = p + k_q / wt
        tau = np.where(p > 0, p / (wt * p + k_t), 0.0)
        ends = c.tables.ends(c.u, k_a, k_b)
        edge = c.tables.hi_at if upper else c.tables.lo_at
        g_r = edge(ends, b / (sr * q))
        g_f = edge(ends, a / (sr * q))
        const = span**2 * k_q / (wt * a * b)
        out = const + span * ((td + g_r + tau) / a + (td + g_f + tau) / b)
    return np.asarray(out)


def period_hi(c: CornerRows, p: F64, k_a: F64, k_b: F64) -> F64:
    """An upper bound of the period at P for every k in [k_a, k_b] (s); rises with P."""
    rows, p, _ = rowwise(c, p)
    return np.asarray(rows.ramp * p + slow_part(c, p, k_a, k_b, upper=True))


def period_lo(c: CornerRows, p: F64, k_a: F64, k_b: F64) -> F64:
    """A lower bound of the period at P for every k in [k_a, k_b] (s); rises with P."""
    rows, p, _ = rowwise(c, p)
    return np.asarray(rows.ramp * p + slow_part(c, p, k_a, k_b, upper=False))


def below_root(c: CornerRows, k_a: F64, k_b: F64, target: F64) -> F64:
    """P' ≥ 0 with period_hi(P) < target for every P < P' (a lower bracket of its root).

    With P_ref = target/A: if the root P* ≤ P_ref, target = A·P* + H(P*) ≤ A·P* + H(P_ref)
    (H1), so P* ≥ (target - H(P_ref))/A; else P* > P_ref. P' is that value clipped to
    [0, P_ref]: at most P* either way."""
    ramp = c.ramp
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ref = target / ramp
        h = slow_part(c, ref, k_a, k_b, upper=True)
        p = np.clip((target - h) / ramp, 0.0, ref)
    return np.asarray(np.nan_to_num(p, nan=0.0, posinf=0.0))


def above_root(c: CornerRows, k_a: F64, k_b: F64, target: F64) -> F64:
    """P'' with period_lo(P) > target for every P > P'' (an upper bracket of its root; < 0:
    no P has period_lo ≤ target).

    P_b, the lower bracket of ``below_root`` for period_lo, is at most its root P*; for
    P ≥ P_b, period_lo(P) ≥ A·P + H_lo(P_b) (H1), so P* ≤ (target - H_lo(P_b))/A = P''."""
    ramp = c.ramp
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ref = target / ramp
        low = np.clip((target - slow_part(c, ref, k_a, k_b, upper=False)) / ramp, 0.0, ref)
        low = np.nan_to_num(low, nan=0.0, posinf=0.0)
        p = (target - slow_part(c, low, k_a, k_b, upper=False)) / ramp
    return np.asarray(np.nan_to_num(p, nan=np.inf))


def overshoot_floor(c: CornerRows, k_a: F64, k_b: F64, p_max: F64) -> tuple[F64, F64]:
    """Lower bounds of the top and the bottom overshoot (V) at every P ≤ p_max and k in
    [k_a, k_b].

    The top one is at least b·o_r/RC' = k·SR·μ_r·o_r with μ_r = b/(SR·Q) ≥
    μ_min = b/(SR·(p_max + k_b/ωt)). Where the tables are claimed, μ·o does not fall with μ
    (G2), so it is at least μ_min·(td + g_lo(μ_min)) (the overshoot's own table, at the
    drive); elsewhere o ≥ td + b/(2·SR) (G0) and k·SR·μ = k·b/Q ≥ b·k_a/(p_max + k_a/ωt)."""
    c, p_max, (k_a, k_b) = rowwise(c, p_max, k_a, k_b)
    a, b, sr, td, wt = c.a, c.b, c.slew, c.delay, c.wt
    out = []
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for drive in (b, a):
            mu = drive / (sr * (p_max + k_b / wt))
            ends = c.tables.ends(c.u, k_a, k_b, drive)
            tight = k_a * sr * mu * (td + c.tables.lo_at(ends, mu))
            loose = drive * (td + drive / (2.0 * sr)) * k_a / (p_max + k_a / wt)
            claimed = ends.ok | ends.ideal
            out.append(np.asarray(np.where(claimed, np.fmax(tight, loose), loose)))
    return out[0], out[1]


def overshoot_ceiling(c: CornerRows, k_a: F64, k_b: F64, p_min: F64) -> tuple[F64, F64]:
    """Upper bounds of the top and the bottom overshoot (V) at every P ≥ p_min and k in
    [k_a, k_b] (inf where the tables are not claimed).

    b·o_r/RC' = k·SR·μ_r·o_r ≤ k·SR·M(μ_r), M(μ) = μ·(td + g_hi(μ)) (the overshoot's table,
    G3 and G4), which does not fall with μ (G2's shape); μ_r = b/(SR·Q) is at most
    b/(SR·(p_min + k_a/ωt)). The lag adds at most b·ε/(1 + ε)² with ε ≤ k_b/(ωt·p_min)."""
    c, p_min, (k_a, k_b) = rowwise(c, p_min, k_a, k_b)
    a, b, sr, td, wt = c.a, c.b, c.slew, c.delay, c.wt
    out = []
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        q = p_min + k_a / wt
        lag = lag_peak(k_b / (wt * p_min))
        for drive in (b, a):
            mu = drive / (sr * q)
            ends = c.tables.ends(c.u, k_a, k_b, drive)
            edge = td + c.tables.hi_at(ends, mu)
            claimed = ends.ok | ends.ideal
            value = k_b * (drive / q) * edge + drive * lag
            out.append(np.asarray(np.where(claimed, value, np.inf)))
    return out[0], out[1]


def share_floor(c: CornerRows, k_a: F64, k_b: F64, p_max: F64) -> F64:
    """A lower bound of the timing share 1 - T_i/T at every P ≤ p_max and k in [k_a, k_b].

    Claimed tables: the share H/(A·P + H) does not rise with P (H2), so it is at least its
    value at p_max, and that at least H_lo/(A·p_max + H_lo). Elsewhere H is at least its
    pure-slew floor A·k_a/ωt + span·(td + span/(2·SR))·(1/a + 1/b) (G0, τi ≥ 0) at every P,
    and A·P at most A·p_max."""
    h = slow_part(c, p_max, k_a, k_b, upper=False)
    c, p_max, (k_a, k_b) = rowwise(c, p_max, k_a, k_b)
    a, b, span, wt = c.a, c.b, c.span, c.wt
    ramp = c.ramp
    with np.errstate(divide="ignore", invalid="ignore"):
        floor = ramp * k_a / wt + span * (c.delay + c.tables.linear(c.u)) * (1 / a + 1 / b)
        claimed = c.tables.claimed(c.u, k_a, k_b) | c.tables.ideal[c.u]
        h = np.where(claimed, h, floor)
        share = h / (ramp * p_max + h)
    return np.asarray(share)
