"""Bounds that prune shared-part combinations before any range is evaluated.

For a combination S (U1, R1, R2, R3, RV1[, R4]) and a capacitor C, the guaranteed range is
[gl, gh]: gl the highest frequency over the spread box at the bottom of the dial, gh the
lowest at the top. Two corners of the box bound them: z2 (``network.FAST_BOTTOM``) at the
bottom and z1 (``network.SLOW_TOP``) at the top, so gl ≥ f(z2) and gh ≤ f(z1). Write
T_z(P) = A·P + B + G(P) for the period at a corner as a function of P, with the corner's
drives a, b, span = VH + VL, slew SR, delay td, k and β_k = k/(1 + k):

    A = span²/(a·b),  B = span·(td + span/(2·SR))·(1/a + 1/b),
    G(P) = span·(t_g(SR·P/b)/a + t_g(SR·P/a)/b),  t_g(ρ) = g(ρ)/(2π·GBW·β_k),

g as in ``search.bounds`` (increasing, concave: g'' has the sign of
ρ²/(1 + ρ) - 2ρ + 2·ln(1 + ρ), which is 0 at 0 with derivative -ρ²/(1 + ρ)² < 0; g(ρ)/ρ
falls; g'(0) = 1/2). Facts used, each from those:

- (F1) T(λ·P) ≤ λ·T(P) for λ ≥ 1 (A·P scales, B does not grow, G(P)/P falls);
- (F2) T(P) ≤ (A + G'(0))·P + B and T(P) ≥ A·P + B (G concave from G(0) = 0, G ≥ 0),
  G'(0) = span·SR/(a·b·2π·GBW·β_k).

Range ratio. With x = P at z1 and Λ = P(z2)/P(z1) (values at each corner; the capacitor
factor taken at its largest over the catalog), gh/gl ≤ T_z2(Λ·x)/T_z1(x) ≤ max(Λ, 1)·
T_z2(x)/T_z1(x) by (F1). Term by term, T_z2(x) ≤ ρA·A1·x + ρB·B1 + γ·G1(x) with ρA = A2/A1,
ρB = B2/B1 and γ ≥ sup G2/G1 (the mediant of the two t_g terms, each ratio at most
max(1, ρ2/ρ1)·β_k1/β_k2 because g(ρ)/ρ falls), so the ratio is a weighted mean: at most
max(ρA, ρB) + max(0, γ - max(ρA, ρB))·σ, σ ≥ G1/T1 = 1/(1 + A1·x/G1), largest at the smallest
x a chain can use: a range with gl ≤ high needs T_z2(Λx) ≥ 1/high, so by (F2)
x ≥ (1/high - B2)/((A2 + G2'(0))·Λ). That bounds every range's ratio by r, and n ranges
cover high/low with overlap o only if r^n/(1 + o)^(n - 1) ≥ high/low (gl1 ≤ low, gh_n ≥ high,
gh_s ≥ gl_s+1·(1 + o)): ``fewest_ranges``.

Capacitor window. The lowest range needs gl ≤ low, so T_z2(P) ≥ 1/low and by (F2)
P(z2) ≥ (1/low - B2)/(A2 + G2'(0)): a smallest C1. The highest needs gh ≥ high, so
A1·P(z1) + B1 ≤ 1/high: a largest Cn (none when B1 ≥ 1/high: the delays alone are too slow).

Nominal rules at the span's ends. The top range's nominal P at its top is at most P1max
times the ratio of nominal to z1 values, and every nominal rule of ``tuning.dial`` that P
can break (amplitude above the band, peak above the swing, slope above the slew rate, timing
share) only gets worse as P falls; so a combination that breaks one there, at the top's
exact nominal drives, cannot cover high. Likewise the amplitude at the bottom of the lowest
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
from tristock.designs.tuned.corners import (
    Corners,
    KFactors,
    beta_k,
    cap_factors,
    col,
    corners,
    g_unit,
)
from tristock.designs.tuned.dial import Limits
from tristock.designs.tuned.model import MAX_RANGES, TunedModel
from tristock.designs.tuned.network import dial_ends
from tristock.search.bounds import LoopTiming, loop_timing

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


def shared_bounds(
    model: TunedModel, u: I64, i3: I64, i4: I64, v: I64, kf: KFactors, *, top_checked: bool = False
) -> tuple[CoreBounds, Corners]:
    """``CoreBounds`` of combinations (module docstring); ``kf`` says which k they allow.
    ``top_checked``: ``top_feasible`` already passed these op amps and R3 with the same k,
    so the top of the span is not checked again."""
    spec = model.spec
    assert spec.tuning is not None
    tu = spec.tuning
    res = model.resistors
    control = tu.control
    bottom, _ = dial_ends(control)
    c = corners(model, u, i3, i4, v, kf)
    cf2 = cap_factors(model, -1).max(axis=1)[c.t2]
    cf1 = cap_factors(model, 1).min(axis=1)[c.t1]
    a2d, b2d, a1d, b1d = c.drive
    span2, span1 = c.span
    sr2, sr1 = c.slew
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g2 = c.g2 / beta_k(kf.k_lo * c.kf2_lo)
        # Λ = P(z2)/P(z1) over every pair and capacitor allowed.
        lam = (c.kf2_hi / c.kf1_lo) * c.rb2 / c.r31 * (cf2 / cf1)
        base = np.maximum(c.a2 / c.a1, np.where(c.b1 > 0, c.b2 / c.b1, 0.0))
        # γ: the t_g ratio of the two corners (slew and drives), times β_k1/β_k2.
        beta_ratio = (c.kf1_hi / c.kf2_lo) * np.maximum(
            1.0, (1 + kf.k_hi * c.kf2_hi) / (1 + kf.k_lo * c.kf1_lo)
        )
        gamma = (
            (span2 / span1)
            * beta_ratio
            * np.maximum(
                np.maximum(1.0, (sr2 * b1d) / (sr1 * b2d)) * a1d / a2d,
                np.maximum(1.0, (sr2 * a1d) / (sr1 * a2d)) * b1d / b2d,
            )
        )
        x_lo = (1 / tu.high_hz - c.b2) / ((c.a2 + g2) * np.maximum(lam, 1.0))
        k1_min = kf.k_lo * c.kf1_lo
        sigma = _share_of_g(x_lo, span1, a1d, b1d, sr1, c.gbw, beta_k(k1_min), c.a1)
        q = base + np.maximum(0.0, gamma - base) * np.where(np.isinf(c.gbw), 0.0, sigma)
        r = np.maximum(lam, 1.0) * q
        fewest = fewest_ranges(
            np.where(c.valid, r, 0.0), tu.low_hz, tu.high_hz, tu.overlap_pct / 100
        )
        # Capacitor window: smallest C1, largest Cn.
        p2_min = np.maximum(1 / tu.low_hz - c.b2, 0.0) / (c.a2 + g2)
        c_min = p2_min / (kf.k_hi * c.kf2_hi * c.rb2 * cf2)
        p1_max = (1 / tu.high_hz - c.b1) / c.a1
        c_max = np.where(p1_max > 0, p1_max / (k1_min * c.r31 * cf1), 0.0)
        # Nominal P: the top's k·R3·C with C ≤ P1max/(k·kf1·R3(z1)·cf1), k cancels; the
        # bottom's likewise from C ≥ P2min/(k·kf2·(R_eff/β)(z2)·cf2).
        rv_nom = np.array([p.value_ohm for p in model.pots])[v]
        r4_nom = np.where(i4 >= 0, res.value[np.maximum(i4, 0)], 0.0)
        reff_n, beta_n = timing_network(res.value[i3], rv_nom, bottom, control, r4_nom)
        p_top = p1_max * res.value[i3] / (c.kf1_lo * c.r31 * cf1)
        p_bottom = p2_min * (np.asarray(reff_n) / np.asarray(beta_n)) / (c.kf2_hi * c.rb2 * cf2)
    feasible = c.valid & (p1_max > 0) & (fewest <= MAX_RANGES)
    top_p = np.full(len(u), np.nan) if top_checked else p_top * (1 + 1e-9)
    feasible &= span_end_checks(model, u, kf.k_lo, kf.k_hi, i3, i4, v, top_p, p_bottom * (1 - 1e-9))
    bounds = CoreBounds(fewest, c_min * (1 - 1e-9), c_max * (1 + 1e-9), p_top, p_bottom, feasible)
    return bounds, c


def top_feasible(model: TunedModel, u: I64, i3: I64, kf: KFactors) -> NDArray[np.bool_]:
    """Whether an op amp and R3 can make the top of the span at all (the top of the dial
    does not involve RV1 or R4): the delays leave room below 1/high_hz at z1 and the nominal
    rules can hold at the largest P the top can have (``span_end_checks``)."""
    n = len(u)
    assert model.spec.tuning is not None
    tu = model.spec.tuning
    i4 = np.zeros(n, dtype=np.int64) if model.divider else np.full(n, -1, dtype=np.int64)
    v = np.zeros(n, dtype=np.int64)
    c = corners(model, u, i3, i4, v, kf)
    cf1 = cap_factors(model, 1).min(axis=1)[c.t1]
    with np.errstate(divide="ignore", invalid="ignore"):
        p1_max = (1 / tu.high_hz - c.b1) / c.a1
        p_top = p1_max * model.resistors.value[i3] / (c.kf1_lo * c.r31 * cf1)
    ok = c.valid_top & (p1_max > 0)
    ok &= span_end_checks(
        model, u, kf.k_lo, kf.k_hi, i3, i4, v, p_top * (1 + 1e-9), np.full(n, np.nan)
    )
    return np.asarray(ok)


def chain_floor(model: TunedModel, c: Corners, k_a: F64, k_b: F64, n: int) -> NDArray[np.int64]:
    """A lower bound of the capacitors' cost of any chain of n that covers the span, for
    every k in [k_a, k_b] (per combination). Each capacitor's range is widened to
    gl' = 1/T_z2(P2) ≤ gl and gh' = 1/T_z1(P1) ≥ gh, the periods of the corners evaluated
    with P2 at its largest (k_b, kf2 high) and β_k at its smallest, P1 at its smallest (k_a,
    kf1 low) and β_k at its largest (T rises with P and falls with β_k); the least cost of a
    chain over those wider ranges (``chains.least_cost_envelope``) cannot exceed the true
    one."""
    from tristock.designs.tuned.chains import INF, least_cost_envelope

    assert model.spec.tuning is not None
    tu = model.spec.tuning
    cap = model.capacitors
    cf2 = cap_factors(model, -1)[c.t2]
    cf1 = cap_factors(model, 1)[c.t1]
    p2 = (k_b * c.kf2_hi * c.rb2)[:, None] * cap.value[None, :] * cf2
    p1 = (k_a * c.kf1_lo * c.r31)[:, None] * cap.value[None, :] * cf1
    t2 = _period(c, p2, beta_k(k_a * c.kf2_lo), bottom=True)
    t1 = _period(c, p1, beta_k(k_b * c.kf1_hi), bottom=False)
    with np.errstate(divide="ignore", invalid="ignore"):
        gl = np.where(c.valid[:, None], (1 - 1e-9) / t2, np.inf)
        gh = np.where(c.valid[:, None], (1 + 1e-9) / t1, 0.0)
    # The nominal rules only where the range can count at all (cheaper, same floor).
    row, col = np.nonzero(np.nan_to_num(gl, nan=np.inf) < np.nan_to_num(gh, nan=0.0))
    span = (gh[row, col] >= tu.low_hz) & (gl[row, col] <= tu.high_hz)
    live = (row[span].astype(np.int64), col[span].astype(np.int64))
    ok = np.zeros(gl.shape, dtype=bool)
    ok[live] = _nominal_ends_ok(model, c, k_a, k_b, live)
    # A capacitor no combination here can use cannot be in any chain: leave its column out.
    cols = np.flatnonzero(ok.any(axis=0))
    rows = ok.any(axis=1)
    out = np.full(len(ok), INF, dtype=np.int64)
    if len(cols) == 0 or not rows.any():
        return out
    gl = np.where(ok, gl, np.inf)[np.ix_(rows, cols)]
    gh = np.where(ok, gh, 0.0)[np.ix_(rows, cols)]
    out[rows] = least_cost_envelope(
        gl, gh, model.capacitor_cost[cols], cap.value[cols], n, tu.low_hz, tu.high_hz,
        tu.overlap_pct / 100,
    )  # fmt: skip
    return out


def _nominal_ends_ok(
    model: TunedModel, c: Corners, k_a: F64, k_b: F64, at: tuple[I64, I64]
) -> NDArray[np.bool_]:
    """For the (combination, capacitor) entries ``at``: whether the nominal rules of
    ``tuning.dial`` can hold at both ends of the dial for some k in [k_a, k_b]: the amplitude
    at the bottom (at most k_b·span + overshoot(k_b, P(k_a)), since at a fixed P the
    overshoot rises with k and it falls with P) reaching the band's floor; at the top the
    amplitude (at least k_a·span + overshoot(k_a, P(k_b))) within the band's top, the timing
    share (at least its value at P(k_b) and k_b, falling with both) within the limit, and the
    slopes b/(R3·C) and a/(R3·C) (independent of k) within the slew rate."""
    limits = Limits.of(model.spec)
    row, j = at
    value = model.capacitors.value[j]
    ab, bb, at_, bt = (x[row] for x in c.nominal)
    span, slew, delay, gbw = c.span_n[row], c.slew_n[row], c.delay_n[row], c.gbw[row]
    ka, kb = k_a[row], k_b[row]

    def timing(k: F64, p: F64, a: F64, b: F64) -> LoopTiming:
        return loop_timing(k, p, span, a, b, slew_rise=slew, slew_fall=slew, delay=delay, gbw=gbw)

    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        rb, r3 = c.rbn[row] * value, c.r3n[row] * value
        bottom_hi = kb * span + timing(kb, ka * rb, ab, bb).overshoot_v
        top_lo = ka * span + timing(ka, kb * r3, at_, bt).overshoot_v
        ok = (bottom_hi >= limits.a_min) & (top_lo <= limits.a_max)
        ok &= timing(kb, kb * r3, at_, bt).timing_share <= limits.share
        ok &= (bt <= slew * r3) & (at_ <= slew * r3)
    return np.asarray(ok)


def _period(c: Corners, p: F64, beta_k: F64, *, bottom: bool) -> F64:
    """T = A·P + B + G(P) at corner z2 (``bottom``) or z1, P of shape (rows, caps)."""
    a2, b2, a1, b1 = c.drive
    a, b = (a2, b2) if bottom else (a1, b1)
    span = c.span[0] if bottom else c.span[1]
    slew = c.slew[0] if bottom else c.slew[1]
    big_a, big_b = (c.a2, c.b2) if bottom else (c.a1, c.b1)
    col = lambda x: np.asarray(x)[:, None]  # noqa: E731
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g = col(span) * (
            _tg(col(slew) * p / col(b), col(c.gbw), col(beta_k)) / col(a)
            + _tg(col(slew) * p / col(a), col(c.gbw), col(beta_k)) / col(b)
        )
        g = np.where(np.isinf(col(c.gbw)), 0.0, g)
        return np.asarray(col(big_a) * p + col(big_b) + g)


def _share_of_g(
    x: F64, span: F64, a: F64, b: F64, slew: F64, gbw: F64, beta_k: F64, big_a: F64
) -> F64:
    """σ ≥ G(x')/(A·x' + G(x')) for every x' ≥ x (it falls with x'); at x ≤ 0 the limit
    G'(0)/(A + G'(0))."""
    g0 = g_unit(span, a, b, slew, gbw) / beta_k
    xs = np.maximum(x, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g = span * (_tg(slew * xs / b, gbw, beta_k) / a + _tg(slew * xs / a, gbw, beta_k) / b)
        at_x = g / (big_a * xs + g)
        limit = g0 / (big_a + g0)
    return np.asarray(np.where(x > 0, np.nan_to_num(at_x, nan=1.0), np.nan_to_num(limit, nan=1.0)))


def _tg(rho: F64, gbw: F64, beta_k: F64) -> F64:
    with np.errstate(divide="ignore", invalid="ignore"):
        lp = np.log1p(rho)
        g = lp - 1.0 + lp / rho
        return np.asarray(np.where(rho > 1e-6, g, rho / 2) / (2 * math.pi * gbw * beta_k))


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


def span_end_checks(
    model: TunedModel,
    u: I64,
    k_lo: F64,
    k_hi: F64,
    i3: I64,
    i4: I64,
    v: I64,
    p_top: F64,
    p_bottom: F64,
) -> NDArray[np.bool_]:
    """The nominal rules at the largest P the top of the highest range can have, and the
    amplitude floor at the smallest P the bottom of the lowest range can have (module
    docstring), for every k in [k_lo, k_hi]. At a fixed P the amplitude, the top peak and the
    slopes rise with k (each overshoot is (V/P)·(k·td + k·V/(2·SR) + (1 + k)·g/(2π·GBW))) and
    the timing share falls with k (t_g ∝ (1 + k)/k), so each test takes the k that is kindest
    to the design."""
    res = model.resistors
    assert model.spec.tuning is not None
    control = model.spec.tuning.control
    bottom, top = dial_ends(control)
    limits = Limits.of(model.spec)
    n = len(u)
    rv = np.array([p.value_ohm for p in model.pots])[v]
    r4 = np.where(i4 >= 0, res.value[np.maximum(i4, 0)], 0.0)
    vh = np.array([o.vh for o in model.opamps])[u]
    vl = np.array([o.vl for o in model.opamps])[u]
    slew, delay = col(model, u, "slew_rise_v_per_s"), col(model, u, "delay_s")
    gbw = col(model, u, "gbw_hz")
    vos1, ib1 = col(model, u, "offset_v"), col(model, u, "bias_a")
    vos2, ib2 = col(model, u, "comparator_offset_v"), col(model, u, "comparator_bias_a")
    span = vh + vl
    r_par = res.value.min() / 2  # R1∥R2 ≥ this for any pair
    r_par_hi = res.value.max() / 2
    ok = np.ones(n, dtype=bool)
    for alpha, p in ((top, p_top), (bottom, p_bottom)):
        r_eff, beta = timing_network(res.value[i3], rv, alpha, control, r4)
        r_eff = np.asarray(r_eff) * np.ones(n)
        beta = np.asarray(beta) * np.ones(n)
        vd = (vos1 + ib1 * r_eff) / beta
        a, b = vh - vd, vl + vd
        live = (a > 0) & (b > 0) & (p > 0) & np.isfinite(p)
        p = np.where(live, p, 1.0)
        a, b = np.where(live, a, 1.0), np.where(live, b, 1.0)

        def timing(k: F64, p: F64 = p, a: F64 = a, b: F64 = b) -> LoopTiming:
            return loop_timing(
                k, p, span, a, b, slew_rise=slew, slew_fall=slew, delay=delay, gbw=gbw
            )

        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            if alpha == top:
                lo = timing(k_lo)
                shift = np.minimum.reduce(
                    [(1 + k) * (vos2 + ib2 * r) for k in (k_lo, k_hi) for r in (r_par, r_par_hi)]
                )
                good = k_lo * span + lo.overshoot_v <= limits.a_max
                good &= vl * k_lo + shift + lo.overshoot_top_v < vh
                good &= (b * k_lo / p <= slew) & (a * k_lo / p <= slew)
                good &= timing(k_hi).timing_share <= limits.share
            else:
                hi = timing(k_hi)
                good = k_hi * span + hi.overshoot_v >= limits.a_min
        ok &= good | ~live
    return ok
