"""The comparator transition's solutions, tabulated once (``transition`` reads them back).

The scaled transition (``transition``'s module docstring)

    dY/dv = tanh(Y(v - D) + μ·v),   Y(v) = 0 for v <= 0,   D = λ·td,   μ = s/(k·SR),

has two parameters, so its solutions are tabulated once (``transition_table``, about 0.13 s
and 20 MB; ``arraycache`` keeps the spline coefficients per machine) by a fourth-order rule on
the equivalent form Φ' = μ + tanh(Φ(v - D)), Φ(v) = Y(v - D) + μ·v, whose delayed term falls
on grid points, and read back by quadratic B-spline interpolation (``gridspline``). For D = 0
the solution is closed: v(Φ) = -Φ/(1 - μ) + ln(((1 + μ)·e^(2Φ) - 1 + μ)/(2μ))/(1 - μ²)
(separable, Y = Φ - μ·v). Past saturation Y = v - u0, so G(L) = u0 + L/2 + c2/L exactly.
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


class EdgeCoefficients(NamedTuple):
    """B-spline coefficients of the padded table: ``levels`` the two level tables stacked
    (index 0: G(L) - L/2, 1: v(L) - L; read in one look-up, ``gridspline``'s ``table``),
    ``u0`` and ``c2`` on (ln μ, ln(1 + D))."""

    levels: FloatArray
    u0: FloatArray
    c2: FloatArray


@cache
def coefficients() -> EdgeCoefficients:
    """B-spline coefficients of the table's arrays (scipy.ndimage's spline_filter), once per
    machine (``arraycache``, keyed by this module's source, the numpy version and scipy's
    build, read without importing it: even the bare package costs about 12 ms)."""
    key = (Path(__file__).read_bytes(), np.__version__, package_stamp("scipy"))
    return EdgeCoefficients(*cached_arrays("transition", key, _filtered_table))


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


__all__ = [
    "LN_LEVEL",
    "LN_MU",
    "PAD",
    "Q_DELAY",
    "EdgeCoefficients",
    "TransitionTable",
    "coefficients",
    "growth_rate",
    "transition_table",
]
