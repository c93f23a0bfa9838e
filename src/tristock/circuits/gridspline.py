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

Up to ``FEW_POINTS`` points the 3^d coefficients of every point are gathered in one array and
weighted axis by axis through broadcasting, and the terms summed in order by a cumulative sum
(a handful of numpy calls, whatever d); above, one pass per term (3^d passes, faster for many
points sharing axes). Both give the same bits, so the switch does not change any value; scipy
is not imported (its ``ndimage`` costs about 50 ms of start-up).
"""

from __future__ import annotations

import functools
import itertools
import math
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]


class GridAxis(NamedTuple):
    """Points on one axis of a table: ``coord``, their clamped grid coordinates; ``first``,
    the first of the three grid lines each point reads (a whole number, as a float: NaN where
    the coordinate is NaN), and the three weights (module docstring)."""

    coord: FloatArray
    first: FloatArray
    weights: tuple[FloatArray, FloatArray, FloatArray]


#: Up to this many points ``spline_value`` gathers every term at once (module docstring).
FEW_POINTS = 256


def grid_axis(coord: npt.ArrayLike, low: float, high: float) -> GridAxis:
    """The points at fractional grid coordinates ``coord``, clamped to [low, high]."""
    c = np.minimum(np.maximum(coord, low), high)  # np.clip's values, with less overhead
    nearest = np.floor(c + 0.5)
    x = c - nearest
    w1 = 0.75 - x * x
    y = 0.5 - x
    w0 = 0.5 * y * y
    w2 = 1.0 - w0
    w2 -= w1
    nearest -= 1.0
    return GridAxis(c, nearest, (w0, w1, w2))


def spline_value(coeffs: FloatArray, axes: tuple[GridAxis, ...]) -> FloatArray:
    """The quadratic B-spline with coefficients ``coeffs`` (a C-contiguous table, one
    ``GridAxis`` per dimension) at the points, shaped as the axes broadcast together."""
    if len(axes) != coeffs.ndim or not coeffs.flags.c_contiguous:
        raise ValueError("coeffs: expected a C-contiguous table with one axis per dimension")
    shape = np.broadcast_shapes(*(np.shape(axis.first) for axis in axes))
    flat = coeffs.ravel()
    steps = [stride // coeffs.itemsize for stride in coeffs.strides]
    start = np.atleast_1d(sum(axis.first * step for axis, step in zip(axes, steps, strict=True)))
    missing = np.isnan(start)
    has_missing = bool(np.any(missing))
    first = np.where(missing, 0.0, start).astype(np.intp) if has_missing else start.astype(np.intp)
    if math.prod(shape) <= FEW_POINTS:
        total = _gathered(flat, tuple(steps), axes, first.reshape(shape))
        if has_missing:
            total[missing.reshape(shape)] = math.nan
        return total
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


@functools.cache
def _term_offsets(steps: tuple[int, ...]) -> npt.NDArray[np.intp]:
    """Flat offsets of the 3^d terms from a point's first coefficient, shaped (3,)*d: term
    (o1, ..., od) at index (o1, ..., od), so that C order is the order of the sum."""
    offsets = np.zeros((3,) * len(steps), dtype=np.intp)
    for axis, step in enumerate(steps):
        offsets += (np.arange(3) * step).reshape((3,) + (1,) * (len(steps) - 1 - axis))
    return offsets


def _gathered(
    flat: FloatArray,
    steps: tuple[int, ...],
    axes: tuple[GridAxis, ...],
    first: npt.NDArray[np.intp],
) -> FloatArray:
    """``spline_value`` at few points: every point's 3^d coefficients in one array (points'
    shape + (3,)*d), multiplied by each axis's weights in turn, summed in C order of the terms
    (``cumsum`` adds one by one, as the passes do; + 0.0 as their sum starts from 0.0)."""
    d = len(axes)
    shape = first.shape
    term = flat.take(first.reshape(shape + (1,) * d) + _term_offsets(steps), mode="clip")
    for n, axis in enumerate(axes):
        weights = np.empty((*np.shape(axis.first), 3))  # an axis's weights share its shape
        for o in range(3):
            weights[..., o] = axis.weights[o]
        term *= weights.reshape(weights.shape[:-1] + (1,) * n + (3,) + (1,) * (d - 1 - n))
    total: FloatArray = np.cumsum(term.reshape((*shape, -1)), axis=-1)[..., -1] + 0.0
    return total


__all__ = ["GridAxis", "grid_axis", "spline_value"]
