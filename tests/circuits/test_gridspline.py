"""circuits.gridspline against scipy.ndimage.map_coordinates (order 2, no prefilter), the
function it stands in for: equal to the bit on random tables and points, in two and three
dimensions, with clamping, broadcasting axes and NaN coordinates."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import numpy.typing as npt
import pytest
from scipy.ndimage import map_coordinates

from tristock.circuits.gridspline import FEW_POINTS, grid_axis, spline_value


def reference(coeffs: np.ndarray, coords: Sequence[npt.ArrayLike]) -> np.ndarray:
    """map_coordinates at the points (each coordinate array of the same shape)."""
    flat = np.stack([np.asarray(c, dtype=float).ravel() for c in coords])
    out = map_coordinates(coeffs, flat, order=2, mode="nearest", prefilter=False)
    return np.asarray(out).reshape(np.shape(coords[0]))


# the gathered terms (a single point, two, a few, the most), one pass per term (above)
@pytest.mark.parametrize("points", [1, 2, 3, 27, 160, FEW_POINTS, FEW_POINTS + 1, 4000])
@pytest.mark.parametrize("shape", [(9, 12), (7, 8, 11)])
def test_equal_to_map_coordinates_bit_for_bit(shape: tuple[int, ...], points: int) -> None:
    rng = np.random.default_rng(len(shape) + points)
    coeffs = rng.normal(size=shape) * 10.0 ** rng.integers(-3, 4, size=shape)
    # inside, on grid lines, on half lines (where n = round(c) rounds), and past both ends;
    # each axis clamped to [1, n - 2], so that the points never reach the edge lines
    coords = [rng.uniform(-1.0, n + 1.0, points) for n in shape]
    for c, n in zip(coords, shape, strict=True):
        c[: points // 4] = rng.integers(1, n - 1, points // 4)
        c[points // 4 : points // 2] = rng.integers(1, n - 2, points // 2 - points // 4) + 0.5
    axes = tuple(grid_axis(c, 1.0, n - 2.0) for c, n in zip(coords, shape, strict=True))
    clamped = [np.clip(c, 1.0, n - 2.0) for c, n in zip(coords, shape, strict=True)]
    assert np.array_equal(spline_value(coeffs, axes), reference(coeffs, clamped))


def test_axes_broadcast_like_their_points() -> None:
    rng = np.random.default_rng(7)
    coeffs = rng.normal(size=(8, 9, 10))
    x, y, z = rng.uniform(1, 6, (2, 1)), rng.uniform(1, 7, 5), rng.uniform(1, 8, (2, 5))
    got = spline_value(coeffs, (grid_axis(x, 1, 6), grid_axis(y, 1, 7), grid_axis(z, 1, 8)))
    full = [np.broadcast_to(c, (2, 5)) for c in (x, y, z)]
    assert got.shape == (2, 5)
    assert np.array_equal(got, reference(coeffs, full))
    one = spline_value(coeffs, (grid_axis(2.3, 1, 6), grid_axis(4.5, 1, 7), grid_axis(3.7, 1, 8)))
    assert one.shape == ()
    assert float(one) == float(reference(coeffs, [2.3, 4.5, 3.7]))


def test_nan_coordinates_give_nan_as_map_coordinates_does() -> None:
    coeffs = np.arange(80.0).reshape(8, 10)
    x, y = np.array([2.5, math.nan, 3.0]), np.array([4.0, 5.0, math.nan])
    for copies in (1, FEW_POINTS):  # the gathered terms / one pass per term
        xs, ys = np.tile(x, copies), np.tile(y, copies)
        got = spline_value(coeffs, (grid_axis(xs, 1, 6), grid_axis(ys, 1, 8)))
        want = reference(coeffs, [xs, ys])
        assert np.array_equal(got, want, equal_nan=True)
        assert np.isnan(got[1:3]).all() and np.isfinite(got[0])


@pytest.mark.parametrize("points", [1, 5, FEW_POINTS + 7])
def test_stacked_tables_read_as_one_call_per_table(points: int) -> None:
    """Each point reads the table it names, to the bit as a call on that table alone (and as
    map_coordinates on it)."""
    rng = np.random.default_rng(points)
    tables = rng.normal(size=(3, 7, 8, 11))
    coords = [rng.uniform(1.0, n - 2.0, points) for n in (7, 8, 11)]
    which = rng.integers(0, 3, points)
    axes = tuple(grid_axis(c, 1.0, n - 2.0) for c, n in zip(coords, (7, 8, 11), strict=True))
    got = spline_value(tables, axes, table=which)
    for t in range(3):
        alone = spline_value(np.ascontiguousarray(tables[t]), axes)
        assert np.array_equal(got[which == t], alone[which == t])
        assert np.array_equal(alone, reference(tables[t], coords))


def test_a_table_that_does_not_fit_is_refused() -> None:
    with pytest.raises(ValueError, match="coeffs"):
        spline_value(np.zeros((4, 4)), (grid_axis(1.0, 1, 2),))
    with pytest.raises(ValueError, match="coeffs"):
        spline_value(np.zeros((4, 6))[:, ::2], (grid_axis(1.0, 1, 2), grid_axis(1.0, 1, 1)))
    with pytest.raises(ValueError, match="coeffs"):  # a table index but one table only
        spline_value(np.zeros((4, 4)), (grid_axis(1.0, 1, 2), grid_axis(1.0, 1, 2)), table=0)
