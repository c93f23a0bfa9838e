"""The comparator's switching transition: a single-pole op amp with a transport delay that
regenerates through R1/R2 while the triangle drives it across its threshold.

The comparator (one op-amp channel) is modelled as a transport delay ``td`` at its input
followed by a single-pole amplifier whose input stage saturates like a differential pair: its
output rate is SR·tanh(ωc·e/SR) (V/s), with e the decision voltage (its + input less its -
input), ωc = 2π·GBW (rad/s) and SR the slew rate of the edge it makes; the output clamps hard
at its square levels. Before the triangle reaches the threshold the output sits at its level;
from the crossing on, e = -(β·y + σ·t), where y (V) is how far the output has moved, β = R1/(R1
+ R2) the positive feedback, t the time since the crossing and σ = (1 - β)·s the rate at which
the triangle (slope s, V/s) drives the + input. The triangle's slope is taken as constant
through the transition (it changes as the square moves; the error grows with the share of the
period the transitions take, about 4e-4 in frequency at a 20 % share).

Scaled with λ = β·ωc (1/s), time v = λ·(t - td) and output Y = λ·y/SR, the motion is the delay
differential equation

    dY/dv = tanh(Y(v - D) + μ·v),   Y(v) = 0 for v <= 0,   D = λ·td,   μ = s/(k·SR),

with k = R1/R2 (μ = σ/(β·SR)). It has two parameters, so its solutions are tabulated once
(``transition_table``, about 0.13 s and 20 MB; ``arraycache`` keeps the spline coefficients
per machine) by a fourth-order rule on the equivalent form Φ' = μ + tanh(Φ(v - D)),
Φ(v) = Y(v - D) + μ·v, whose delayed term falls on grid points, and read back by quadratic
B-spline interpolation (``gridspline``). For D = 0 the solution is closed: v(Φ) = -Φ/(1 - μ)
+ ln(((1 + μ)·e^(2Φ) - 1 + μ)/(2μ))/(1 - μ²) (separable, Y = Φ - μ·v).

What the oscillator needs from a transition that moves the output by L (scaled) is the mean
time at which it passes each level on the way, G(L) = (1/L)·∫_0^L v(Y) dY: the transition acts
on the integrator exactly like an instant step at td + G(W)/λ (W = λ·(VH + VL)/SR, the whole
edge), and the triangle overshoots its threshold by s·(td + G(L0)/λ) where L0 is the scaled
distance to the integrator's neutral level. For a linear slew (μ → ∞ or a very long edge)
G(L) → L/2, the familiar τ/2. Past saturation Y = v - u0, so G(L) = u0 + L/2 + c2/L exactly.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from tristock.circuits.arraycache import cached_arrays, package_stamp
from tristock.circuits.gridspline import GridAxis, grid_axis, spline_value

FloatArray = npt.NDArray[np.float64]

#: Grid of ln μ (μ = s/(k·SR)): 1e-6 .. about 15, step 0.5; linear extrapolation below.
LN_MU = np.arange(math.log(1e-6), math.log(16.0), 0.5)
#: Grid of q = ln(1 + D) for the scaled delay D = β·2π·GBW·td: D from 0 to 120, step 0.15.
Q_DELAY = np.arange(0.0, math.log(121.0) + 1e-9, 0.15)
#: Grid of ln L for the scaled output level L = λ·ΔV/SR: 1e-4 .. 200, step 0.1.
LN_LEVEL = np.arange(math.log(1e-4), math.log(200.0) + 1e-9, 0.1)
#: Φ at which the amplifier counts as saturated (tanh = 1 - 1.7e-6).
SATURATED = 7.0
#: Grid lines of linear continuation around the table for the spline.
PAD = 3
#: Order of the interpolating B-spline: quadratic is 2.3x faster than cubic and as accurate
#: where it matters (0.007 against 0.002 in G; rounder at v's kink; ``gridspline``: quadratic).
SPLINE_ORDER = 2
EDGE_LEVEL_MIN = 0.1  # scaled level λ·V/SR from which (G1)-(G3) are verified
#: Up to this many points ``switch_times`` reads its three levels in one look-up.
MERGED_LOOKUP_POINTS = 8192
#: ``switch_times``'s three levels (whole edge, drive, half edge): their level tables (0: G(L) -
#: L/2, 1: v(L) - L) and what turns a table's value into G or v (+ 0.5·L, + L).
_LEVEL_KINDS = np.array([0.0, 0.0, 1.0])
_LEVEL_SHIFTS = np.array([0.5, 0.5, 1.0])
#: Integration step per growth time 1/r(D) of the linear regime.
STEP_PER_GROWTH = 0.03


@dataclass(frozen=True)
class TransitionTable:
    """Tabulated solutions of the scaled transition on the (ln μ, ln(1 + D), ln L) grid.

    ``mean_time[i, j, l]`` = G(L) - L/2 and ``level_time[i, j, l]`` = v(L) - L (scaled time
    at which the output has moved by L, less L); ``u0[i, j]`` and ``c2[i, j]`` give
    G(L) = u0 + L/2 + c2/L and v(L) = L + u0 past the grid's last level.
    """

    mean_time: FloatArray
    level_time: FloatArray
    u0: FloatArray
    c2: FloatArray


def growth_rate(delay: float) -> float:
    """r(D): the linear regime grows as e^(r·v) with r = e^(-r·D), i.e. r = W0(D)/D (W0 the
    principal branch of Lambert's W); r(0) = 1."""
    if delay == 0.0:
        return 1.0
    from scipy.special import lambertw  # here: only the table's first computation needs it

    return float(np.real(lambertw(delay))) / delay


def _closed_form_curve(mu: float) -> tuple[FloatArray, FloatArray]:
    """(v, Y) samples of the D = 0 solution from its closed form, v from 0 to saturation."""
    a, b = 1.0 + mu, 1.0 - mu
    phi = np.concatenate([[0.0], np.geomspace(mu * 1e-7, SATURATED + 2.0, 2000)])
    v = -phi / b + (2.0 * phi + np.log((a - b * np.exp(-2.0 * phi)) / (2.0 * mu))) / (a * b)
    v[0] = 0.0
    return v, phi - mu * v


def _early_curve(mu: float, delay: float) -> tuple[FloatArray, FloatArray]:
    """(v, Y) when the triangle alone saturates the input within the delay (μ·D >= SATURATED):
    on [0, D] the delayed feedback is still zero, so Y' = tanh(μ·v) and Y = ln cosh(μ·v)/μ;
    from D on Y' >= tanh(μ·D), i.e. 1 within 2e-6."""
    v = np.linspace(0.0, delay, 1500)
    x = mu * v
    return v, (x + np.log1p(np.exp(-2.0 * x)) - math.log(2.0)) / mu


def _delayed_curves(mus: FloatArray, delays: FloatArray) -> list[tuple[FloatArray, FloatArray]]:
    """(v, Y) samples for (μ, D) columns with 0 < μ·D < SATURATED, all stepped together.

    Column c uses the step h = D/m (m >= 2 a whole number) so that the delayed term
    f(v) = tanh(Φ(v - D)) (zero before v = D) is known on the grid, and
    Φ_{n+1} = Φ_n + h·μ + h·(-f_{n-1} + 13·f_n + 13·f_{n+1} - f_{n+2})/24 (the cubic through
    four neighbours integrated over the middle step: error O(h^4)); Φ = μ·v on [0, D]. A
    column stops once Φ(v - D) >= SATURATED.
    """
    unique, inverse = np.unique(delays, return_inverse=True)
    rates = np.array([growth_rate(float(d)) for d in unique])[inverse]
    h_max = STEP_PER_GROWTH / np.maximum(rates, mus)
    m = np.maximum(2, np.ceil(delays / h_max)).astype(int)
    h = delays / m
    cols = np.arange(delays.size)
    growth = rates**2 * (1.0 + rates * delays)  # Y ≈ μ·e^(r·v)/growth in the linear regime
    span = 2.0 * delays + (np.log(np.maximum(growth / mus, 1.0)) + SATURATED + 5.0) / rates
    # Φ' >= μ, so Φ(v - D) >= SATURATED once v >= D + SATURATED/μ
    span = np.minimum(span, delays + (SATURATED + 1.0) / mus)
    budget = int(np.max(span / h)) + int(np.max(m)) + 10
    phi = np.zeros((delays.size, budget + 3))
    tanh = np.zeros_like(phi)

    def f(j: int) -> FloatArray:
        row: FloatArray = tanh[cols, np.maximum(j - m, 0)]  # tanh(Φ_0) = 0 stands for "before D"
        return row

    stop = np.full(delays.size, -1)
    window = [f(-1), f(0), f(1)]
    for n in range(budget + 1):
        window.append(f(n + 2))
        rule = (13.0 * (window[1] + window[2]) - window[0] - window[3]) / 24.0
        del window[0]
        step = phi[:, n] + h * (mus + rule)
        phi[:, n + 1] = np.where(n + 1 <= m, mus * (n + 1) * h, step)
        tanh[:, n + 1] = np.tanh(phi[:, n + 1])
        done = (stop < 0) & (n + 1 > m) & (phi[cols, np.maximum(n + 1 - m, 0)] >= SATURATED)
        stop[done] = n + 1
        if np.all(stop >= 0):
            break
    if np.any(stop < 0):
        raise RuntimeError("transition table: a column did not saturate within its step budget")
    curves = []
    for c in cols:
        n_y = stop[c] - m[c] + 1
        v = np.arange(n_y) * h[c]
        y = phi[c, m[c] : m[c] + n_y] - mus[c] * (v + delays[c])
        curves.append((v, np.maximum.accumulate(np.maximum(y, 0.0))))
    return curves


def _columns(
    v: FloatArray, y: FloatArray, levels: FloatArray
) -> tuple[FloatArray, FloatArray, float, float]:
    """From one curve: G(L) - L/2 and v(L) - L at ``levels``, and its u0 and c2."""
    area = np.concatenate([[0.0], np.cumsum(0.5 * (y[1:] + y[:-1]) * np.diff(v))])
    y_end, v_end = float(y[-1]), float(v[-1])
    u0 = v_end - y_end
    h_end = y_end * v_end - float(area[-1])  # ∫_0^Y_end v dY
    c2 = h_end - 0.5 * y_end**2 - u0 * y_end
    inside = levels <= y_end
    lv = levels[inside]
    k = np.clip(np.searchsorted(y, lv, side="right") - 1, 0, y.size - 2)
    frac = (lv - y[k]) / np.where(y[k + 1] > y[k], y[k + 1] - y[k], 1.0)
    v_at = v[k] + frac * (v[k + 1] - v[k])
    area_at = area[k] + 0.5 * (v_at - v[k]) * (y[k] + lv)
    mean = np.empty_like(levels)
    level = np.empty_like(levels)
    mean[inside] = v_at - area_at / lv - 0.5 * lv
    level[inside] = v_at - lv
    mean[~inside] = u0 + c2 / levels[~inside]
    level[~inside] = u0
    return mean, level, u0, c2


@cache
def transition_table() -> TransitionTable:
    """Solve the scaled transition for every grid point (once per process)."""
    levels = np.exp(LN_LEVEL)
    delays = np.expm1(Q_DELAY)
    mus = np.exp(LN_MU)
    shape = (mus.size, delays.size, levels.size)
    mean = np.empty(shape)
    level = np.empty(shape)
    u0 = np.empty(shape[:2])
    c2 = np.empty(shape[:2])
    mu_grid, d_grid = np.meshgrid(mus, delays, indexing="ij")
    stepped = (d_grid > 0.0) & (mu_grid * d_grid < SATURATED)
    curves = dict(
        zip(
            zip(*np.nonzero(stepped), strict=True),
            _delayed_curves(mu_grid[stepped], d_grid[stepped]),
            strict=True,
        )
    )
    for i, j in np.ndindex(*shape[:2]):
        if j == 0:
            curve = _closed_form_curve(float(mus[i]))
        elif not stepped[i, j]:
            curve = _early_curve(float(mus[i]), float(delays[j]))
        else:
            curve = curves[(i, j)]
        mean[i, j], level[i, j], u0[i, j], c2[i, j] = _columns(*curve, levels)
    for array in (mean, level, u0, c2):
        array.setflags(write=False)
    return TransitionTable(mean, level, u0, c2)


class _Coefficients(NamedTuple):
    """B-spline coefficients of the padded table: ``levels`` the two level tables stacked
    (index 0: G(L) - L/2, 1: v(L) - L; read in one look-up, ``gridspline``'s ``table``),
    ``u0`` and ``c2`` on (ln μ, ln(1 + D))."""

    levels: FloatArray
    u0: FloatArray
    c2: FloatArray


@cache
def _coefficients() -> _Coefficients:
    """B-spline coefficients of the table's arrays (scipy.ndimage's spline_filter), once per
    machine (``arraycache``, keyed by this module's source, the numpy version and scipy's
    build, read without importing it: even the bare package costs about 12 ms)."""
    key = (Path(__file__).read_bytes(), np.__version__, package_stamp("scipy"))
    return _Coefficients(*cached_arrays("transition", key, _filtered_table))


def _filtered_table() -> list[FloatArray]:
    from scipy.ndimage import spline_filter  # here: a cache miss only (about 50 ms to import)

    tab = transition_table()
    mean, level, u0, c2 = (
        spline_filter(
            np.pad(a, PAD, mode="reflect", reflect_type="odd"), SPLINE_ORDER, mode="nearest"
        )
        for a in (tab.mean_time, tab.level_time, tab.u0, tab.c2)
    )
    return [np.stack([mean, level]), u0, c2]


def _axis(coord: FloatArray, lines: int) -> GridAxis:
    """Points at grid coordinates ``coord`` of the table, clamped to it, on an axis of
    ``lines`` padded lines: PAD odd reflections (linear continuation) on each side give the
    spline no artificial slope at the edges, and no point reaches their outer lines."""
    return grid_axis(coord + PAD, PAD, lines - 1.0 - PAD)


class _Place(NamedTuple):
    """Points (μ, D) on the table's first two axes, shared by look-ups at several levels: ``x``
    the grid coordinate in ln μ, ``below`` where it is under 0 (linear there), None: nowhere."""

    x: FloatArray
    below: npt.NDArray[np.bool_] | None
    mu: GridAxis
    delay: GridAxis


def _place(mu: FloatArray, delay: FloatArray) -> _Place:
    shape = _coefficients().u0.shape
    x = (np.log(mu) - LN_MU[0]) / (LN_MU[1] - LN_MU[0])
    y = np.log1p(np.maximum(delay, 0.0)) / (Q_DELAY[1] - Q_DELAY[0])
    below = x < 0.0
    return _Place(x, below if below.any() else None, _axis(x, shape[0]), _axis(y, shape[1]))


def _extrapolated(
    coeffs: FloatArray, place: _Place, *rest: GridAxis, table: FloatArray | None = None
) -> FloatArray:
    """The B-spline at (μ, D, *rest), continued linearly below the first grid line in ln μ
    (``table``: which of the stacked tables each point reads)."""
    value = spline_value(coeffs, (place.mu, place.delay, *rest), table)
    if place.below is not None:
        lines = coeffs.shape[-2 - len(rest)]  # the μ axis
        at_zero = spline_value(coeffs, (_axis(np.zeros(()), lines), place.delay, *rest), table)
        at_one = spline_value(coeffs, (_axis(np.ones(()), lines), place.delay, *rest), table)
        value = np.where(place.below, at_zero + place.x * (at_one - at_zero), value)
    return value


def _at_level(kind: FloatArray, place: _Place, level: FloatArray) -> FloatArray:
    """The level tables ``kind`` (0: G(L) - L/2, 1: v(L) - L; whole numbers broadcast with the
    levels) at ``place`` and levels L, the saturated forms past L_max, in one look-up."""
    coeffs = _coefficients()
    z = (np.log(np.maximum(level, 1e-300)) - LN_LEVEL[0]) / (LN_LEVEL[1] - LN_LEVEL[0])
    value = _extrapolated(coeffs.levels, place, _axis(z, coeffs.levels.shape[3]), table=kind)
    beyond = level > math.exp(LN_LEVEL[-1])
    if beyond.any():
        u0 = _extrapolated(coeffs.u0, place)
        mean = u0 + _extrapolated(coeffs.c2, place) / np.where(beyond, level, 1.0)
        value = np.where(beyond, np.where(kind == 0, mean, u0), value)
    return value


def _lookup(kind: int, mu: npt.ArrayLike, delay: npt.ArrayLike, level: npt.ArrayLike) -> FloatArray:
    """``_at_level`` at broadcast (μ, D, L)."""
    mu_a, d_a, l_a = np.broadcast_arrays(
        np.asarray(mu, dtype=float), np.asarray(delay, dtype=float), np.asarray(level, dtype=float)
    )
    return _at_level(np.full(l_a.shape, float(kind)), _place(mu_a, d_a), l_a)


def scaled_mean_time(mu: npt.ArrayLike, delay: npt.ArrayLike, level: npt.ArrayLike) -> FloatArray:
    """G(L): the mean scaled time at which the output passes the levels 0..L, counted from the
    end of the delay; vectorised over broadcast arguments.

    Quadratic B-spline interpolation in (ln μ, ln(1 + D), ln L) of the tabulated solutions; below
    μ = 1e-6 continued linearly in ln μ (the solution then only shifts in time by
    ln(μ0/μ)/r(D)); μ is clamped at the grid's top (about 15), D to [0, 120] and L at 1e-4;
    past L = 200 the saturated form u0 + L/2 + c2/L is exact. Measured against direct
    solutions of the scaled equation: within 0.01 (scaled time) for 1e-5 <= μ <= 1,
    D <= 40, 0.5 <= L <= 150.
    """
    return _lookup(0, mu, delay, level) + 0.5 * np.asarray(level, dtype=float)


def scaled_level_time(mu: npt.ArrayLike, delay: npt.ArrayLike, level: npt.ArrayLike) -> FloatArray:
    """v(L): the scaled time, from the end of the delay, at which the output has moved by L
    (as ``scaled_mean_time``; past L = 200, v = L + u0). Within 0.02 over the same range:
    v(L) has a kink in D where v(L) = D (the feedback arrives just as L is reached), which
    the spline rounds."""
    v: FloatArray = _lookup(1, mu, delay, level) + np.asarray(level, dtype=float)
    return v


class SwitchTimes(NamedTuple):
    """Times (s) from the moment the triangle crosses the threshold, one comparator edge.

    - ``centroid``: when an instant step would have the same effect on the integrator, i.e. the
      mean time at which the output passes each level of its edge (td + τ/2 for a linear slew).
    - ``mid``: when the output crosses mid-swing.
    - ``overshoot``: ∫(square - neutral)/drive dt from the crossing until the square reaches the
      integrator's neutral level: the triangle overshoots its threshold by slope·overshoot.
    """

    centroid: FloatArray
    mid: FloatArray
    overshoot: FloatArray


def switch_times(
    k: FloatArray,
    slope: FloatArray,
    span: FloatArray,
    drive: FloatArray,
    slew: FloatArray,
    gbw: FloatArray,
    delay: FloatArray,
) -> SwitchTimes:
    """The times of comparator edges (see SwitchTimes), vectorised over broadcast arguments
    (``predict`` stacks its rising and falling edges along a first axis).

    ``k`` = R1/R2; ``slope`` the triangle's slope before the turn (V/s); ``span`` = VH + VL the
    edge (V); ``drive`` the distance from the starting level to the integrator's neutral level
    (V); ``slew`` the edge's slew rate (V/s); ``gbw`` (Hz); ``delay`` the transport delay td (s).

    GBW = inf: a linear slew after td, exact: centroid = mid = td + span/(2·SR), overshoot =
    td + drive/(2·SR). Finite GBW (SR must be finite): with λ = β·2π·GBW, β = k/(1 + k),
    D = λ·td, μ = slope/(k·SR): centroid = td + G(W)/λ with W = λ·span/SR, mid = td +
    v(W/2)/λ, overshoot = td + G(λ·drive/SR)/λ (G and v from ``scaled_mean_time`` and
    ``scaled_level_time``). Valid while the edge is short against the ramp (see the module
    notes) and μ <= 15 (the triangle's slope below 15·k·SR; beyond, μ is clamped: the edge is
    then a delayed slew almost at once).
    """
    infinite_slew = np.isinf(slew)
    if infinite_slew.any() and (infinite_slew & np.isfinite(gbw)).any():
        raise ValueError(
            "slew: a finite gbw needs a finite slew rate (the comparator's input stage "
            "saturates at SR·tanh(2π·GBW·e/SR))"
        )

    def linear() -> tuple[FloatArray, FloatArray]:
        with np.errstate(divide="ignore", invalid="ignore"):
            return delay + 0.5 * span / slew, delay + 0.5 * drive / slew

    shape = np.broadcast(k, slope, span, drive, slew, gbw, delay).shape
    finite = np.isfinite(gbw)
    if not finite.any():
        linear_mid, linear_over = linear()
        return SwitchTimes(linear_mid, linear_mid, linear_over)
    everywhere = bool(finite.all())
    # each value is computed at the shape of its own arguments, broadcast (copied) at the end
    safe_gbw = gbw if everywhere else np.where(finite, gbw, 1.0)
    safe_slew = slew if everywhere else np.where(finite, slew, 1.0)
    lam = k / (1.0 + k) * 2.0 * math.pi * safe_gbw
    mu = np.minimum(slope / (k * safe_slew), math.exp(LN_MU[-1]))
    place = _place(mu, lam * delay)
    whole = lam * span / safe_slew
    half = 0.5 * whole
    drive_level = lam * drive / safe_slew
    if drive_level.shape == whole.shape:
        levels = np.array([whole, drive_level, half])  # np.stack's values, less overhead
    else:
        levels = np.stack(np.broadcast_arrays(whole, drive_level, half))
    if whole.size <= MERGED_LOOKUP_POINTS:  # one look-up for all three levels (same values)
        found = _at_level(_LEVEL_KINDS.reshape((3,) + (1,) * whole.ndim), place, levels)
        g_whole, g_drive, v_mid = found + _LEVEL_SHIFTS.reshape((3,) + (1,) * whole.ndim) * levels
    else:
        g_whole, g_drive, v_mid = (
            _at_level(np.full((), kind), place, x) + shift * x
            for kind, shift, x in zip(_LEVEL_KINDS, _LEVEL_SHIFTS, levels, strict=True)
        )
    times = [delay + g_whole / lam, delay + v_mid / lam, delay + g_drive / lam]
    if not everywhere:
        linear_mid, linear_over = linear()
        slewed = (linear_mid, linear_mid, linear_over)
        times = [np.where(finite, t, lin) for t, lin in zip(times, slewed, strict=True)]
    full = [t if t.shape == shape else np.broadcast_to(t, shape).copy() for t in times]
    return SwitchTimes(*full)
