"""Bounds that prune shared-part combinations before any range is evaluated.

For a combination S (U1, R1, R2, R3, RV1[, R4]) and a capacitor C, the guaranteed range is
[gl, gh]: gl the highest frequency over the spread box at the bottom of the dial, gh the
lowest at the top. Two corners of the box bound them: z2 (``network.FAST_BOTTOM``) at the
bottom and z1 (``network.SLOW_TOP``) at the top, so gl ≥ f(z2) and gh ≤ f(z1) (the verdict's
ends include both corners, ``coverage``). At each corner the full model's period is T(P),
P = k·R·C (``corners``), and ``loopbounds`` gives T_lo ≤ T ≤ T_hi over the k the
combination allows, both rising with P and written T = A·P + H(P) with H not falling and
H/P not rising in P ((H1), (H2)). With P2 = P at z2 and P1 = P at z1:

Capacitor window. The lowest range needs gl ≤ low, so T_hi,z2(P2) ≥ 1/low: P2 is at least
the lower bracket of that root (``below_root``), a smallest C1. The highest needs gh ≥ high,
so T_lo,z1(P1) ≤ 1/high: P1 is at most the upper bracket (``above_root``), a largest Cn
(none when it is ≤ 0: the delays alone are too slow).

Range ratio. With x = P1 and Λ ≥ P2/P1 (the network's and the factors' ratio, the
capacitor's taken at its widest over the catalog), gh/gl ≤ T_z2(P2)/T_z1(x) ≤
T_hi,z2(Λx)/T_lo,z1(x) = (A2·Λx + H2(Λx))/(A1·x + H1(x)), a weighted mean of q1 = Λ·A2/A1
(weight w = A1·x/T_lo,z1(x)) and H2(Λx)/H1(x). A range that reaches into the span has
gl ≤ high, so T_hi,z2(Λx) ≥ 1/high and x ≥ x_lo (``below_root``/Λ), and gh ≥ low, so
T_lo,z1(x) ≤ 1/low and x ≤ x_hi (``above_root``). On [x_lo, x_hi], H2(Λx)/H1(x) ≤
γ = H2(Λ·x_hi)/H1(x_lo) (H1) and 1 - w = H1/(A1·x + H1) ≤ σ, its value at x_lo (H2); so
every range's ratio is at most r = q1 + max(0, γ - q1)·σ, and n ranges cover high/low with
overlap o only if r^n/(1 + o)^(n - 1) ≥ high/low (gl1 ≤ low, gh_n ≥ high,
gh_s ≥ gl_s+1·(1 + o)): ``fewest_ranges``. No x at all (x_lo > x_hi): no range.

Nominal rules at the span's ends (``spanends``). The top range's nominal P at its top is at
most P1max times the ratio of nominal to z1 values; every nominal rule of ``tuning.dial``
that P can break there (amplitude above the band, peak above the swing, slope above the slew
rate, timing share) only gets worse as P falls, so a combination that breaks one at that P
for every k it allows cannot cover high. Likewise the amplitude at the bottom of the lowest
range must reach the band's floor.

Pairs enter through k: at the combination level (``CoreBounds``) every pair of the op amp's
window and every R1/R2 tolerance and tempco is allowed for (the loosest end of each), at the
level of one pair exactly.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.timing import timing_network
from tristock.designs.tuned.corners import Corners, KFactors, cap_factors, corners
from tristock.designs.tuned.loopbounds import (
    CornerRows,
    above_root,
    below_root,
    period_hi,
    period_lo,
    slow_part,
)
from tristock.designs.tuned.model import MAX_RANGES, TunedModel
from tristock.designs.tuned.network import dial_ends
from tristock.designs.tuned.spanends import nominal_ends_ok, span_end_checks

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]


@dataclass
class CoreBounds:
    """Per combination: fewest ranges possible (MAX_RANGES + 1: none), the smallest C1 and the
    largest Cn (F) at the extreme k allowed, the nominal P the top of the span can have at
    most and its bottom at least (s), and whether anything is possible at all."""

    fewest: I64
    c_min: F64
    c_max: F64
    p_top: F64
    p_bottom: F64
    feasible: NDArray[np.bool_]


def _k_ranges(c: Corners, k_lo: F64, k_hi: F64) -> tuple[F64, F64, F64, F64]:
    """The k ranges at z2 and at z1 for nominal k in [k_lo, k_hi]: (k2a, k2b, k1a, k1b)."""
    return (
        np.asarray(k_lo * c.kf2_lo),
        np.asarray(k_hi * c.kf2_hi),
        np.asarray(k_lo * c.kf1_lo),
        np.asarray(k_hi * c.kf1_hi),
    )


def shared_bounds(
    model: TunedModel,
    u: I64,
    i3: I64,
    i4: I64,
    v: I64,
    kf: KFactors,
    *,
    top: TopRoots | None = None,
) -> tuple[CoreBounds, Corners]:
    """``CoreBounds`` of combinations (module docstring); ``kf`` says which k they allow.
    ``top``: each row's ``top_roots`` (passed, with the same k), so the top of the span is
    neither checked nor its roots sought again."""
    spec = model.spec
    assert spec.tuning is not None
    tu = spec.tuning
    res = model.resistors
    control = tu.control
    bottom, _ = dial_ends(control)
    n = len(u)
    c = corners(model, u, i3, i4, v, kf)
    cf2 = cap_factors(model, -1).max(axis=1)[c.t2]
    cf1 = cap_factors(model, 1).min(axis=1)[c.t1]
    k2a, k2b, k1a, k1b = _k_ranges(c, kf.k_lo, kf.k_hi)
    z2, z1 = c.z2, c.z1
    low, high = np.full(n, 1 / tu.low_hz), np.full(n, 1 / tu.high_hz)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lam = (c.kf2_hi / c.kf1_lo) * c.rb2 / c.r31 * (cf2 / cf1)
        x_lo = below_root(z2, k2a, k2b, high) / lam
        x_hi = above_root(z1, k1a, k1b, low) if top is None else top.x_hi
        r = range_ratio(z2, z1, lam, x_lo, x_hi, (k2a, k2b), (k1a, k1b))
        fewest = fewest_ranges(
            np.where(c.valid, r, 0.0), tu.low_hz, tu.high_hz, tu.overlap_pct / 100
        )
        # The capacitor window only where the span can be covered at all (NaN elsewhere).
        live = np.flatnonzero(c.valid & (fewest <= MAX_RANGES))
        p2_min, p1_max = np.full(n, np.nan), np.full(n, np.nan)
        p2_min[live] = below_root(z2.take(live), k2a[live], k2b[live], low[live])
        p1_max[live] = (
            above_root(z1.take(live), k1a[live], k1b[live], high[live])
            if top is None
            else top.p1_max[live]
        )
        c_min = p2_min / (k2b * c.rb2 * cf2)
        c_max = np.where(p1_max > 0, p1_max / (k1a * c.r31 * cf1), 0.0)
        # Nominal P: the top's k·R3·C with C ≤ P1max/(k·kf1·R3(z1)·cf1), k cancels; the
        # bottom's likewise from C ≥ P2min/(k·kf2·(R_eff/β)(z2)·cf2).
        rv_nom = np.array([p.value_ohm for p in model.pots])[v]
        r4_nom = np.where(i4 >= 0, res.value[np.maximum(i4, 0)], 0.0)
        reff_n, beta_n = timing_network(res.value[i3], rv_nom, bottom, control, r4_nom)
        p_top = p1_max * res.value[i3] / (c.kf1_lo * c.r31 * cf1)
        p_bottom = p2_min * (np.asarray(reff_n) / np.asarray(beta_n)) / (c.kf2_hi * c.rb2 * cf2)
    feasible = c.valid & (p1_max > 0) & (fewest <= MAX_RANGES)
    top_p = p_top * (1 + 1e-9) if top is None else np.full(n, np.nan)
    live = np.flatnonzero(feasible)  # the span's ends only where anything is left
    feasible[live] = span_end_checks(
        model, u[live], kf.k_lo[live], kf.k_hi[live], i3[live], i4[live], v[live],
        top_p[live], p_bottom[live] * (1 - 1e-9),
    )  # fmt: skip
    bounds = CoreBounds(fewest, c_min * (1 - 1e-9), c_max * (1 + 1e-9), p_top, p_bottom, feasible)
    return bounds, c


def range_ratio(
    z2: CornerRows,
    z1: CornerRows,
    lam: F64,
    x_lo: F64,
    x_hi: F64,
    k2: tuple[F64, F64],
    k1: tuple[F64, F64],
) -> F64:
    """r ≥ gh/gl of every range with x = P1 in [x_lo, x_hi] (module docstring): inf where a
    bound is not finite, 0 where no x is left."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        q1 = lam * z2.ramp / z1.ramp
        x0 = np.maximum(x_lo, 0.0)
        h2 = slow_part(z2, lam * x_hi, *k2, upper=True)
        h1 = slow_part(z1, x0, *k1, upper=False)
        gamma = h2 / h1
        sigma = h1 / (z1.ramp * x0 + h1)
        r = q1 + np.maximum(0.0, gamma - q1) * sigma
        good = np.isfinite(r) & (h1 > 0) & (q1 > 0)
        r = np.where(good, r, np.inf)
    return np.asarray(np.where(x_lo > x_hi, 0.0, r))


@dataclass
class TopRoots:
    """Per (op amp, R3) row, with k over the op amp's window: whether the top of the span can
    be made at all (the delays leave room below 1/high_hz at z1 and the nominal rules can
    hold at the largest P the top can have, ``span_end_checks``), and the upper brackets of
    P1 at 1/low (``x_hi``) and at 1/high (``p1_max``) that every core through it shares: the
    top of the dial involves neither RV1 nor R4 (both networks give R_eff = R3 and β = 1
    there, exactly)."""

    ok: NDArray[np.bool_]
    x_hi: F64
    p1_max: F64


def top_roots(model: TunedModel, u: I64, i3: I64, kf: KFactors) -> TopRoots:
    """``TopRoots`` of rows (op amp, R3) with k factors ``kf`` (the op amp's window)."""
    n = len(u)
    assert model.spec.tuning is not None
    tu = model.spec.tuning
    i4 = np.zeros(n, dtype=np.int64) if model.divider else np.full(n, -1, dtype=np.int64)
    v = np.zeros(n, dtype=np.int64)
    c = corners(model, u, i3, i4, v, kf)
    cf1 = cap_factors(model, 1).min(axis=1)[c.t1]
    _, _, k1a, k1b = _k_ranges(c, kf.k_lo, kf.k_hi)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        p1_max = above_root(c.z1, k1a, k1b, np.full(n, 1 / tu.high_hz))
        x_hi = above_root(c.z1, k1a, k1b, np.full(n, 1 / tu.low_hz))
        p_top = p1_max * model.resistors.value[i3] / (c.kf1_lo * c.r31 * cf1)
    ok = c.valid_top & (p1_max > 0)
    ok &= span_end_checks(
        model, u, kf.k_lo, kf.k_hi, i3, i4, v, p_top * (1 + 1e-9), np.full(n, np.nan)
    )
    return TopRoots(np.asarray(ok), x_hi, p1_max)


def chain_floor(model: TunedModel, c: Corners, k_a: F64, k_b: F64, n: int) -> NDArray[np.int64]:
    """A lower bound of the capacitors' cost of any chain of n that covers the span, for
    every k in [k_a, k_b] (per combination). Each capacitor's range is widened to
    gl' = 1/T_hi,z2(P2) ≤ gl and gh' = 1/T_lo,z1(P1) ≥ gh, with P2 at its largest (k_b, kf2
    high) and P1 at its smallest (k_a, kf1 low) and the bounds over the k the corners allow
    (both rise with P); the least cost of a chain over those wider ranges
    (``chains.least_cost_envelope``) cannot exceed the true one."""
    return chain_floor_and_ranges(model, c, k_a, k_b, n)[0]


def chain_floor_and_ranges(
    model: TunedModel, c: Corners, k_a: F64, k_b: F64, n: int
) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
    """``chain_floor``, and per (combination, capacitor) whether the widened range can count
    at all: it reaches into the span and the nominal rules can hold at its ends
    (``nominal_ends_ok``). A range the full model finds usable at the search's corners
    (``ranges.evaluate_ranges``: the same corners, the same nominal rules) always can."""
    from tristock.designs.tuned.chains import INF, least_cost_envelope

    assert model.spec.tuning is not None
    tu = model.spec.tuning
    cap = model.capacitors
    cf2 = cap_factors(model, -1)[c.t2]
    cf1 = cap_factors(model, 1)[c.t1]
    p2 = (k_b * c.kf2_hi * c.rb2)[:, None] * cap.value[None, :] * cf2
    p1 = (k_a * c.kf1_lo * c.r31)[:, None] * cap.value[None, :] * cf1
    k2a, k2b, k1a, k1b = _k_ranges(c, k_a, k_b)
    t2 = period_hi(c.z2, p2, k2a, k2b)
    t1 = period_lo(c.z1, p1, k1a, k1b)
    with np.errstate(divide="ignore", invalid="ignore"):
        gl = np.where(c.valid[:, None], (1 - 1e-9) / t2, np.inf)
        gh = np.where(c.valid[:, None], (1 + 1e-9) / t1, 0.0)
    # The nominal rules only where the range can count at all (cheaper, same floor).
    live = np.nan_to_num(gl, nan=np.inf) < np.nan_to_num(gh, nan=0.0)
    live &= (gh >= tu.low_hz) & (gl <= tu.high_hz)
    rows_live = np.flatnonzero(live.any(axis=1))
    ok = np.zeros(gl.shape, dtype=bool)
    ok[rows_live] = live[rows_live] & nominal_ends_ok(
        model, c.take(rows_live), k_a[rows_live], k_b[rows_live]
    )
    # A capacitor no combination here can use cannot be in any chain: leave its column out.
    cols = np.flatnonzero(ok.any(axis=0))
    keep = ok.any(axis=1)
    out = np.full(len(ok), INF, dtype=np.int64)
    if len(cols) == 0 or not keep.any():
        return out, ok
    gl = np.where(ok, gl, np.inf)[np.ix_(keep, cols)]
    gh = np.where(ok, gh, 0.0)[np.ix_(keep, cols)]
    out[keep] = least_cost_envelope(
        gl, gh, model.capacitor_cost[cols], cap.value[cols], n, tu.low_hz, tu.high_hz,
        tu.overlap_pct / 100,
    )  # fmt: skip
    return out, ok


def fewest_ranges(ratio: F64, low: float, high: float, overlap: float) -> I64:
    """Fewest n with ratio^n/(1 + o)^(n - 1) ≥ high/low (MAX_RANGES + 1 when none up to
    MAX_RANGES; a ratio ≤ 1 allows no range at all)."""
    out = np.full(len(ratio), MAX_RANGES + 1, dtype=np.int64)
    span = math.log(high / low)
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_r = np.log(ratio)
    ln_o = math.log1p(overlap)
    for n in range(MAX_RANGES, 0, -1):
        reach = n * ln_r - (n - 1) * ln_o
        out = np.where((ratio > 1) & (reach >= span * (1 - 1e-12)), n, out)
    return out
