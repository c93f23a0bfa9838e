"""Rows (U1, R1, R2, R3, C1, RV1) of the trimmed search, evaluated with the full model.

Every number comes from ``physics.predict`` through ``search.rows.RowPrediction``,
with the trimmer wired as ``timing.timing_network`` has it in series with R3:
R_eff = R3 + α·RV (α the wiper, 0 = none of RV1 added). The nominal board is
``Design.oscillator`` at 25 °C and nominal rails, the op amp as catalogued. A row is a
candidate (the final coverage check, ``trim.checks.coverage``, then decides) when:

1. stock covers the boards (a stock code in two resistor positions needs two pieces a
   board), and the cost is within ``limits.max_cost``;
2. the nominal board reaches the target inside the margins: f(m) ≥ f_target ≥ f(1 - m);
3. f falls along the whole travel (the model's ground for a trim: the wiper's nominal
   position is then unique). Proven per row: dT/dR_eff ≥ span·(k·C1·span - |Ib1|·T)/(a·b)
   (``trim.cells``), positive while |Ib1|·T < k·C1·span, and over α in [0, 1]
   T ≤ T_hi(k·(R3 + RV)·C1), the period bound of ``search.bounds`` over that Ve range; a row
   where |Ib1|·T_hi ≥ k·C1·span is rejected;
4. at the nominal wiper α0 (f(α0) = f_target, solved on the full model) the fixed design's
   acceptance holds (``RowPrediction.accepted``): amplitude in its band, the triangle's
   peaks inside the integrator's swing, the integrator's slew at least the slope, the timing
   share within ``limits.max_timing_share``, C1's rating over the peak with the amplitude
   margin. That is the operating point the board is used at: every board is trimmed to the
   target, and the nominal one sits at α0;
5. the drift after trimming, max |f(T)/f(25 °C) - 1| over the two temperature ends with the
   wiper left at α0 (full model, nominal rails), is finite (the board oscillates at both
   ends) and within ``trim.drift_after_trim_pct``;
6. no probe corner of the spread box misses the target (``trim.probes``; necessary).

Scores: the resolution |d ln f/dα| at α0 = (RV/R_eff)·d ln T/d ln R_eff, computed as the
Richardson extrapolation of central differences of ln T in ln R_eff with steps 1e-3 and
5e-4 (error below 1e-11, far under the score's 1e-6), and the drift; both quantised to
``SCORE_RESOLUTION``; cost in steps of 1e-4.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.board import Design
from tristock.designs.trimmed.context import (
    F64,
    I64,
    TrimContext,
    quantise_cost,
    quantise_score,
)
from tristock.designs.trimmed.probes import probes_pass, row_reach
from tristock.search.bounds import amplitude_bounds, period_bounds
from tristock.search.rows import RowPrediction

#: Central-difference step of ln T in ln R_eff (Richardson: this and half of it).
FD_STEP = 1e-3
#: A row's resolution may fall below its cell's bound by this relative amount (rounding).
BOUND_SLACK = 1e-9


@dataclass
class TrimRows:
    """Candidate rows: indices into the model's tables and ``ctx.pots``, the nominal wiper
    α0, resolution (% per %), drift (fraction), cost and their integer keys."""

    u: I64
    i1: I64
    i2: I64
    i3: I64
    j: I64
    v: I64
    wiper: F64
    resolution: F64
    drift: F64
    cost: F64
    res_q: I64
    drift_q: I64
    cost_q: I64

    def __len__(self) -> int:
        return len(self.u)

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> TrimRows:
        return TrimRows(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})


def row_design(ctx: TrimContext, rows: TrimRows, n: int) -> Design:
    """The Design of row ``n``, its wiper at the nominal α0."""
    return ctx.design(
        int(rows.u[n]),
        int(rows.i1[n]),
        int(rows.i2[n]),
        int(rows.i3[n]),
        int(rows.j[n]),
        int(rows.v[n]),
        wiper=float(rows.wiper[n]),
    )


@dataclass
class RowStats:
    """What became of the rows evaluated, for the reasons of an empty answer."""

    evaluated: int = 0
    stock_or_cost: int = 0
    unreached: int = 0  # the nominal board cannot reach the target inside the margins
    not_monotone: int = 0
    outside_ground: int = 0  # bands, swing, slew, timing share or C1 rating at α0
    drift: int = 0
    probes: int = 0
    candidates: int = 0
    smallest_drift: float = float("inf")  # among rows over the drift limit
    bound_violations: int = 0


def nominal_period(ctx: TrimContext, u: I64, values: tuple[F64, F64, F64, F64]) -> F64:
    """The nominal board's period (s), NaN where the loop cannot oscillate."""
    rp = RowPrediction.nominal(ctx.model, u, values)
    return np.asarray(rp.pred.period_s, dtype=np.float64)


def _monotone(ctx: TrimContext, u: I64, k: F64, r3: F64, rv: F64, c: F64) -> NDArray[np.bool_]:
    """|Ib1|·T_hi < k·C1·span over the whole travel (module docstring, item 3)."""
    ops = ctx.model.opamps
    vos = np.array([o.model.offset_v for o in ops])[u]
    ib = np.array([o.model.bias_a for o in ops])[u]
    ve_a, ve_b = vos + ib * r3, vos + ib * (r3 + rv)
    loop = ctx.model.loops(u)._replace(ve_lo=np.minimum(ve_a, ve_b), ve_hi=np.maximum(ve_a, ve_b))
    t_hi = period_bounds(loop, k, k * (r3 + rv) * c).hi
    span = loop.span_lo  # the op-amp loop's levels do not depend on the row
    with np.errstate(invalid="ignore"):
        return np.asarray(np.abs(ib) * t_hi < k * c * span * (1 - 1e-12))


def held_to_bounds(ctx: TrimContext, u: I64, k: F64, r_eff: F64, c: F64, rp: RowPrediction) -> bool:
    """Whether the full model's period and amplitude at these rows lie inside the bounds of
    ``search.bounds`` at their own P and Ve, the bounds every window here rests on (cheap
    insurance, as the fixed search has: a model change that broke a monotonicity would
    otherwise go unseen)."""
    n = np.flatnonzero(rp.valid)
    if len(n) == 0:
        return True
    ops = ctx.model.opamps
    ve = np.array([o.model.offset_v for o in ops])[u[n]]
    ve = ve + np.array([o.model.bias_a for o in ops])[u[n]] * r_eff[n]
    loop = ctx.model.loops(u[n])._replace(ve_lo=ve, ve_hi=ve)
    p = k[n] * r_eff[n] * c[n]
    t = period_bounds(loop, k[n], p)
    a = amplitude_bounds(loop, k[n], p, p)
    period = np.asarray(rp.pred.period_s)[n]
    amp = np.asarray(rp.pred.amplitude_vpp)[n]
    slack = 1e-9
    inside = (period >= t.lo * (1 - slack)) & (period <= t.hi * (1 + slack))
    inside &= (amp >= a.lo * (1 - slack)) & (amp <= a.hi * (1 + slack))
    return bool(inside.all())


def solve_wiper(
    ctx: TrimContext,
    u: I64,
    values: tuple[F64, F64, F64, F64],
    rv: F64,
    t_lo: F64,
    t_hi: F64,
) -> F64:
    """α0 in [m, 1 - m] with the nominal period T(α0) = T_target, given T(m) = t_lo ≤ T_target
    ≤ t_hi = T(1 - m) and T rising with α: regula falsi with the Illinois step, to the
    last bits of α (T is nearly affine in α, so a few steps do)."""
    r1, r2, r3, c = values
    t_t = ctx.target_period_s
    a = np.full(len(u), ctx.margin)
    b = np.full(len(u), 1.0 - ctx.margin)
    fa, fb = t_lo - t_t, t_hi - t_t
    x = a.copy()
    side = np.zeros(len(u), dtype=np.int8)
    for _ in range(100):
        with np.errstate(invalid="ignore", divide="ignore"):
            x = np.where(fb != fa, (a * fb - b * fa) / (fb - fa), (a + b) / 2)
        x = np.clip(np.where(np.isfinite(x), x, (a + b) / 2), a, b)
        fx = nominal_period(ctx, u, (r1, r2, r3 + x * rv, c)) - t_t
        done = (fx == 0) | (b - a <= 4e-16 * np.maximum(b, 1e-300))
        low = fx < 0  # x is below the root
        fb = np.where(low & (side == -1), fb / 2, fb)
        fa = np.where(~low & (side == 1), fa / 2, fa)
        a, fa = np.where(low, x, a), np.where(low, fx, fa)
        b, fb = np.where(low, b, x), np.where(low, fb, fx)
        side = np.where(low, -1, 1).astype(np.int8)
        if np.all(done | (np.abs(fx) <= 1e-15 * t_t)):
            break
    return np.asarray(x, dtype=np.float64)


def resolution(ctx: TrimContext, u: I64, r1: F64, r2: F64, r_eff: F64, c: F64, rv: F64) -> F64:
    """|d ln f/dα| = (RV/R_eff)·d ln T/d ln R_eff at R_eff (module docstring)."""

    def slope(h: float) -> F64:
        up = nominal_period(ctx, u, (r1, r2, r_eff * np.exp(h), c))
        down = nominal_period(ctx, u, (r1, r2, r_eff * np.exp(-h), c))
        return np.asarray((np.log(up) - np.log(down)) / (2 * h))

    d = (4 * slope(FD_STEP / 2) - slope(FD_STEP)) / 3
    return np.asarray(np.abs(rv / r_eff * d), dtype=np.float64)


def drift_at_wiper(
    ctx: TrimContext, u: I64, parts: tuple[I64, I64, I64, I64, I64], wiper: F64, f25: F64
) -> F64:
    """max |f(T)/f(25 °C) - 1| over the temperature ends, the wiper at ``wiper``: every value
    moved by its tempco as ``Design.oscillator`` does, rails nominal (inf where the loop
    cannot oscillate at an end)."""
    i1, i2, i3, j, v = parts
    res, cap, pots = ctx.model.resistors, ctx.model.capacitors, ctx.pots
    env = ctx.spec.environment
    out = np.zeros(len(u))
    for temp in (env.temp_min_c, env.temp_max_c):

        def at(value: F64, tc: F64, temp: float = temp) -> F64:
            return np.asarray(value * (1.0 + tc * 1e-6 * (temp - 25.0)))

        r_eff = at(res.value[i3], res.tempco[i3]) + wiper * at(pots.value[v], pots.tempco[v])
        values = (
            at(res.value[i1], res.tempco[i1]),
            at(res.value[i2], res.tempco[i2]),
            r_eff,
            at(cap.value[j], cap.tempco[j]),
        )
        change = np.abs(1.0 / nominal_period(ctx, u, values) / f25 - 1.0)
        out = np.maximum(out, np.where(np.isnan(change), np.inf, change))  # no oscillation: inf
    return out


def _take(sel: I64, *arrays: NDArray[Any]) -> tuple[Any, ...]:
    return tuple(a[sel] for a in arrays)


def evaluate(
    ctx: TrimContext,
    rows: tuple[I64, I64, I64, I64, I64, I64],
    res_lb: F64,
    stats: RowStats,
) -> tuple[TrimRows, bool]:
    """The candidates among ``rows`` (u, i1, i2, i3, j, v) by the module docstring's rules,
    and False when a row's resolution fell below its cell's bound ``res_lb`` or its period or
    amplitude at α0 left the bounds of ``search.bounds`` (a proof the search rests on has
    failed)."""
    model = ctx.model
    res, cap, pots = model.resistors, model.capacitors, ctx.pots
    u, i1, i2, i3, j, v = rows
    stats.evaluated += len(u)
    boards = model.boards
    same12, same13, same23 = i1 == i2, i1 == i3, i2 == i3
    ok = res.stock[i1] >= boards * (1 + same12 + same13)
    ok &= res.stock[i2] >= boards * (1 + same12 + same23)
    ok &= res.stock[i3] >= boards * (1 + same13 + same23)
    u_cost = np.array([o.part.cost_per_board for o in model.opamps])[u]
    cost = u_cost + res.cost[i1] + res.cost[i2] + res.cost[i3] + cap.cost[j] + pots.cost[v]
    if ctx.spec.limits.max_cost is not None:
        ok &= cost <= ctx.spec.limits.max_cost + 1e-12
    sel = np.flatnonzero(ok)
    stats.stock_or_cost += len(u) - len(sel)
    u, i1, i2, i3, j, v, cost, res_lb = _take(sel, u, i1, i2, i3, j, v, cost, res_lb)

    r1, r2, r3 = res.value[i1], res.value[i2], res.value[i3]
    c, rv = cap.value[j], pots.value[v]
    m, t_t = ctx.margin, ctx.target_period_s
    t_m = nominal_period(ctx, u, (r1, r2, r3 + m * rv, c))
    t_far = nominal_period(ctx, u, (r1, r2, r3 + (1 - m) * rv, c))
    with np.errstate(invalid="ignore"):
        reach = (t_m <= t_t) & (t_far >= t_t)
    sel = np.flatnonzero(reach)
    stats.unreached += len(u) - len(sel)
    u, i1, i2, i3, j, v, cost, res_lb, t_m, t_far = _take(
        sel, u, i1, i2, i3, j, v, cost, res_lb, t_m, t_far
    )
    r1, r2, r3 = res.value[i1], res.value[i2], res.value[i3]
    c, rv = cap.value[j], pots.value[v]
    k = r1 / r2

    mono = _monotone(ctx, u, k, r3, rv, c)
    stats.not_monotone += int((~mono).sum())
    sel = np.flatnonzero(mono)
    u, i1, i2, i3, j, v, cost, res_lb, t_m, t_far, r1, r2, r3, c, rv = _take(
        sel, u, i1, i2, i3, j, v, cost, res_lb, t_m, t_far, r1, r2, r3, c, rv
    )

    alpha = solve_wiper(ctx, u, (r1, r2, r3, c), rv, t_m, t_far)
    r_eff = r3 + alpha * rv
    at0 = RowPrediction.nominal(model, u, (r1, r2, r_eff, c))
    held = held_to_bounds(ctx, u, r1 / r2, r_eff, c, at0)
    good = at0.accepted(ctx.spec, cap.voltage[j])
    stats.outside_ground += int((~good).sum())
    f25 = np.asarray(at0.pred.frequency_hz, dtype=np.float64)
    sel = np.flatnonzero(good)
    u, i1, i2, i3, j, v, cost, res_lb, r1, r2, r3, c, rv, alpha, r_eff, f25 = _take(
        sel, u, i1, i2, i3, j, v, cost, res_lb, r1, r2, r3, c, rv, alpha, r_eff, f25
    )

    drift = drift_at_wiper(ctx, u, (i1, i2, i3, j, v), alpha, f25)
    limit = ctx.drift_limit
    if limit is not None or not np.isfinite(drift).all():
        over = ~(drift <= (np.inf if limit is None else limit)) | ~np.isfinite(drift)
        stats.drift += int(over.sum())
        if over.any():
            stats.smallest_drift = min(stats.smallest_drift, float(drift[over].min()))
        sel = np.flatnonzero(~over)
        u, i1, i2, i3, j, v, cost, res_lb, r1, r2, c, rv, alpha, r_eff, drift = _take(
            sel, u, i1, i2, i3, j, v, cost, res_lb, r1, r2, c, rv, alpha, r_eff, drift
        )

    slow, fast = row_reach(ctx, u, i1, i2, i3, j, v)
    passed = probes_pass(ctx, slow, fast)
    stats.probes += int((~passed).sum())
    sel = np.flatnonzero(passed)
    u, i1, i2, i3, j, v, cost, res_lb, r1, r2, c, rv, alpha, r_eff, drift = _take(
        sel, u, i1, i2, i3, j, v, cost, res_lb, r1, r2, c, rv, alpha, r_eff, drift
    )

    res_pp = resolution(ctx, u, r1, r2, r_eff, c, rv)
    below = res_pp < res_lb * (1 - BOUND_SLACK) - 1e-15
    stats.bound_violations += int(below.sum()) + (not held)
    held &= not below.any()
    stats.candidates += len(u)
    out = TrimRows(
        u=u,
        i1=i1,
        i2=i2,
        i3=i3,
        j=j,
        v=v,
        wiper=alpha,
        resolution=res_pp,
        drift=drift,
        cost=cost,
        res_q=quantise_score(res_pp),
        drift_q=quantise_score(drift),
        cost_q=quantise_cost(cost),
    )
    return out, held
