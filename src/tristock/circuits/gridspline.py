"""Quadratic B-spline values of a table at many points, in plain numpy, equal to the bit to
``scipy.ndimage.map_coordinates(coeffs, coords, order=2, prefilter=False)`` away from the
table's edges.

At a fractional grid coordinate c on one axis, with n = round(c) (halves rounded up) and
x = c - n (-1/2 <= x < 1/2), the quadratic B-spline reads the grid lines n - 1, n and n + 1
with the weights

    w0 = (1/2 - x)²/2,   w1 = 3/4 - x²,   w2 = 1 - w0 - w1

and its value is the sum over the 3^d neighbouring coefficients of c·w(axis 1)·w(axis 2)·...
For the sums to agree to the bit with ``map_coordinates``, every weight and every term is
computed as it computes them: the terms in C order of their offsets (last axis fastest), each
coefficient multiplied by its weights axis by axis, the terms added one by one to 0.0. The
points are given axis by axis (``GridAxis``), so points that share a coordinate (several
look-ups at the same μ and delay, say) share that axis's work; their shapes broadcast.

Coordinates are clamped to [low, high]; the caller pads its table so that the clamped points
never reach its outer lines (``map_coordinates`` would then apply its boundary mode). A NaN
coordinate gives NaN, as it does in ``map_coordinates``.

Up to ``FEW_POINTS`` points ``map_coordinates`` itself answers (its C loop beats the 3^d numpy
passes there, whose cost is mostly per call); above, the numpy passes (faster for many points
sharing axes). Both give the same bits, so the switch does not change any value.
"""

from __future__ import annotations

import itertools
import math
from typing import NamedTuple

import numpy as np
import numpy.typing as npt
from scipy.ndimage import map_coordinates

FloatArray = npt.NDArray[np.float64]


class GridAxis(NamedTuple):
    """Points on one axis of a table: ``coord``, their clamped grid coordinates; ``first``,
    the first of the three grid lines each point reads (a whole number, as a float: NaN where
    the coordinate is NaN), and the three weights (module docstring)."""

    coord: FloatArray
    first: FloatArray
    weights: tuple[FloatArray, FloatArray, FloatArray]


#: Up to this many points ``spline_value`` calls ``map_coordinates`` (module docstring).
FEW_POINTS = 768


def grid_axis(coord: npt.ArrayLike, low: float, high: float) -> GridAxis:
    """The points at fractional grid coordinates ``coord``, clamped to [low, high]."""
    c = np.clip(coord, low, high)
    nearest = np.floor(c + 0.5)
    x = c - nearest
    w1 = 0.75 - x * x
    y = 0.5 - x
    w0 = 0.5 * y * y
    return GridAxis(c, nearest - 1.0, (w0, w1, 1.0 - w0 - w1))


def spline_value(coeffs: FloatArray, axes: tuple[GridAxis, ...]) -> FloatArray:
    """The quadratic B-spline with coefficients ``coeffs`` (a C-contiguous table, one
    ``GridAxis`` per dimension) at the points, shaped as the axes broadcast together."""
    if len(axes) != coeffs.ndim or not coeffs.flags.c_contiguous:
        raise ValueError("coeffs: expected a C-contiguous table with one axis per dimension")
    shape = np.broadcast_shapes(*(np.shape(axis.first) for axis in axes))
    if math.prod(shape) <= FEW_POINTS:
        coords = np.stack([np.broadcast_to(axis.coord, shape).reshape(-1) for axis in axes])
        values = map_coordinates(coeffs, coords, order=2, mode="nearest", prefilter=False)
        return np.asarray(values, dtype=np.float64).reshape(shape)
    flat = coeffs.ravel()
    steps = [stride // coeffs.itemsize for stride in coeffs.strides]
    start = np.atleast_1d(sum(axis.first * step for axis, step in zip(axes, steps, strict=True)))
    missing = np.isnan(start)
    has_missing = bool(np.any(missing))
    first = np.where(missing, 0.0, start).astype(np.intp) if has_missing else start.astype(np.intp)
    total = np.zeros(first.shape)
    term = np.empty(first.shape)
    for offsets in itertools.product(range(3), repeat=len(axes)):
        shift = sum(o * step for o, step in zip(offsets, steps, strict=True))
        flat[shift:].take(first, out=term, mode="clip")
        for axis, o in zip(axes, offsets, strict=True):
            term *= axis.weights[o]
        total += term
    if has_missing:
        total[missing] = math.nan
    return total.reshape(shape)


__all__ = ["GridAxis", "grid_axis", "spline_value"]
