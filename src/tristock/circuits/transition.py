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
(``edgetable``) and read back here by quadratic B-spline interpolation (``gridspline``).

What the oscillator needs from a transition that moves the output by L (scaled) is the mean
time at which it passes each level on the way, G(L) = (1/L)·∫_0^L v(Y) dY: the transition acts
on the integrator exactly like an instant step at td + G(W)/λ (W = λ·(VH + VL)/SR, the whole
edge), and the triangle overshoots its threshold by s·(td + G(L0)/λ) where L0 is the scaled
distance to the integrator's neutral level. For a linear slew (μ → ∞ or a very long edge)
G(L) → L/2, the familiar τ/2. Past saturation Y = v - u0, so G(L) = u0 + L/2 + c2/L exactly.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from tristock.circuits.edgetable import LN_LEVEL, LN_MU, PAD, Q_DELAY, coefficients
from tristock.circuits.gridspline import GridAxis, grid_axis, spline_value

FloatArray = npt.NDArray[np.float64]

EDGE_LEVEL_MIN = 0.1  # scaled level λ·V/SR from which (G1)-(G3) are verified
#: Up to this many points ``switch_times`` reads its three levels in one look-up.
MERGED_LOOKUP_POINTS = 8192
#: ``switch_times``'s three levels (whole edge, drive, half edge): their level tables (0: G(L) -
#: L/2, 1: v(L) - L) and what turns a table's value into G or v (+ 0.5·L, + L).
_LEVEL_KINDS = np.array([0.0, 0.0, 1.0])
_LEVEL_SHIFTS = np.array([0.5, 0.5, 1.0])


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
    shape = coefficients().u0.shape
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
    coeffs = coefficients()
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
    return SwitchTimes(*_edge_times(k, slope, span, drive, slew, gbw, delay))


def centroid_times(
    k: FloatArray,
    slope: FloatArray,
    span: FloatArray,
    slew: FloatArray,
    gbw: FloatArray,
    delay: FloatArray,
) -> FloatArray:
    """``switch_times(...).centroid`` alone, the same to the bit (every value is computed on
    its own), with one table look-up a point instead of three: what the period needs."""
    return _edge_times(k, slope, span, None, slew, gbw, delay)[0]


def _edge_times(
    k: FloatArray,
    slope: FloatArray,
    span: FloatArray,
    drive: FloatArray | None,
    slew: FloatArray,
    gbw: FloatArray,
    delay: FloatArray,
) -> list[FloatArray]:
    """[centroid, mid, overshoot] (``switch_times``), or [centroid] when ``drive`` is None."""
    infinite_slew = np.isinf(slew)
    if infinite_slew.any() and (infinite_slew & np.isfinite(gbw)).any():
        raise ValueError(
            "slew: a finite gbw needs a finite slew rate (the comparator's input stage "
            "saturates at SR·tanh(2π·GBW·e/SR))"
        )

    def linear() -> list[FloatArray]:
        with np.errstate(divide="ignore", invalid="ignore"):
            mid = delay + 0.5 * span / slew
            return [mid, mid, delay + 0.5 * drive / slew] if drive is not None else [mid]

    args = (k, slope, span, slew, gbw, delay) + ((drive,) if drive is not None else ())
    shape = np.broadcast(*args).shape
    finite = np.isfinite(gbw)
    if not finite.any():
        return linear()
    everywhere = bool(finite.all())
    # each value is computed at the shape of its own arguments, broadcast (copied) at the end
    safe_gbw = gbw if everywhere else np.where(finite, gbw, 1.0)
    safe_slew = slew if everywhere else np.where(finite, slew, 1.0)
    lam = k / (1.0 + k) * 2.0 * math.pi * safe_gbw
    mu = np.minimum(slope / (k * safe_slew), math.exp(LN_MU[-1]))
    place = _place(mu, lam * delay)
    whole = lam * span / safe_slew
    if drive is None:
        times = [delay + (_at_level(np.full((), 0.0), place, whole) + 0.5 * whole) / lam]
    else:
        half = 0.5 * whole
        drive_level = lam * drive / safe_slew
        if drive_level.shape == whole.shape:
            levels = np.array([whole, drive_level, half])  # np.stack's values, less overhead
        else:
            levels = np.stack(np.broadcast_arrays(whole, drive_level, half))
        if whole.size <= MERGED_LOOKUP_POINTS:  # one look-up for all three levels (same values)
            kinds = _LEVEL_KINDS.reshape((3,) + (1,) * whole.ndim)
            shifts = _LEVEL_SHIFTS.reshape((3,) + (1,) * whole.ndim)
            g_whole, g_drive, v_mid = _at_level(kinds, place, levels) + shifts * levels
        else:
            g_whole, g_drive, v_mid = (
                _at_level(np.full((), kind), place, x) + shift * x
                for kind, shift, x in zip(_LEVEL_KINDS, _LEVEL_SHIFTS, levels, strict=True)
            )
        times = [delay + g_whole / lam, delay + v_mid / lam, delay + g_drive / lam]
    if not everywhere:
        times = [np.where(finite, t, lin) for t, lin in zip(times, linear(), strict=True)]
    return [t if t.shape == shape else np.broadcast_to(t, shape).copy() for t in times]
