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

Several tables of one shape stacked along a first axis are read in one call, each point from
its own (``table``): the same terms in the same order as one call per table.

Up to ``FEW_POINTS`` points the 3^d coefficients of every point are gathered in one array,
terms first (3^d, points), weighted axis by axis through broadcasting and summed over the
first axis by ``np.add.reduce``, which adds row after row in order when that axis is not the
fast one in memory (numpy sums pairwise only along the fast axis: at least two points are
evaluated so that it never is); a dozen numpy calls whatever d. Above, one pass per term (3^d
passes over arrays the size of the points, which stay in the cache). Both give the same bits,
so the switch does not change any value; scipy is not imported (its ``ndimage`` costs about
50 ms of start-up).
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


#: Up to this many points ``spline_value`` gathers every term at once (module docstring):
#: 1.5-4x faster than the passes from 8 to 1,024 points, still ahead at 2,048, behind from
#: 4,096 on the edge's 3-d table (``python tests/benchmark_spline.py``).
FEW_POINTS = 2048


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


def spline_value(
    coeffs: FloatArray, axes: tuple[GridAxis, ...], table: npt.ArrayLike | None = None
) -> FloatArray:
    """The quadratic B-spline with coefficients ``coeffs`` (a C-contiguous table, one
    ``GridAxis`` per dimension) at the points, shaped as the axes broadcast together.

    ``table``: ``coeffs`` holds several tables of one shape along a first axis, and each point
    reads the table of this index (whole numbers, broadcast with the axes)."""
    stacked = table is not None
    if len(axes) + stacked != coeffs.ndim or not coeffs.flags.c_contiguous:
        raise ValueError("coeffs: expected a C-contiguous table with one axis per dimension")
    flat = coeffs.ravel()
    steps = [stride // coeffs.itemsize for stride in coeffs.strides]
    start = sum(axis.first * step for axis, step in zip(axes, steps[stacked:], strict=True))
    if stacked:  # whole numbers far below 2^53: the sum is exact
        start = start + np.asarray(table, dtype=float) * steps[0]
    shape = np.shape(start)
    start = np.atleast_1d(start)
    missing = np.isnan(start)
    has_missing = bool(missing.any())
    first = np.where(missing, 0.0, start).astype(np.intp) if has_missing else start.astype(np.intp)
    grid_steps = tuple(steps[stacked:])
    if first.size <= FEW_POINTS:
        total = _gathered(flat, grid_steps, axes, first)
    else:
        total = np.zeros(first.shape)
        term = np.empty(first.shape)
        for offsets in itertools.product(range(3), repeat=len(axes)):
            shift = sum(o * step for o, step in zip(offsets, grid_steps, strict=True))
            flat[shift:].take(first, out=term, mode="clip")
            for axis, o in zip(axes, offsets, strict=True):
                term *= axis.weights[o]
            total += term
    if has_missing:
        total[missing] = math.nan
    return total.reshape(shape)


@functools.cache
def _term_offsets(steps: tuple[int, ...]) -> npt.NDArray[np.intp]:
    """Flat offsets of the 3^d terms from a point's first coefficient, a column (3^d, 1) in C
    order of the terms (o1, ..., od), the order of the sum."""
    offsets = np.zeros((3,) * len(steps), dtype=np.intp)
    for axis, step in enumerate(steps):
        offsets += (np.arange(3) * step).reshape((3,) + (1,) * (len(steps) - 1 - axis))
    return offsets.reshape(-1, 1)


def _gathered(
    flat: FloatArray,
    steps: tuple[int, ...],
    axes: tuple[GridAxis, ...],
    first: npt.NDArray[np.intp],
) -> FloatArray:
    """``spline_value`` at few points: every point's 3^d coefficients in one array (3,)*d +
    (points,), multiplied by each axis's weights in turn, summed over the terms in C order
    (module docstring: a single point is evaluated twice so that the terms are never the fast
    axis; + 0.0 as the passes' sum starts from 0.0)."""
    d = len(axes)
    size = first.size
    index = first.reshape(1, -1) if size > 1 else np.repeat(first.reshape(1, 1), 2, axis=1)
    points = first.shape if size > 1 else (2,)
    term = flat.take(_term_offsets(steps) + index, mode="clip").reshape((3,) * d + points)
    for n, axis in enumerate(axes):
        weights = np.array(axis.weights)  # (3, the axis's shape), which broadcasts to the points'
        lead = (1,) * n + (3,) + (1,) * (d - 1 - n)
        tail = weights.shape[1:] if size > 1 else ()
        term *= weights.reshape(lead + (1,) * (len(points) - len(tail)) + tail)
    total: FloatArray = np.add.reduce(term.reshape(3**d, -1), axis=0)[:size] + 0.0
    return total.reshape(first.shape)


__all__ = ["GridAxis", "grid_axis", "spline_value"]
