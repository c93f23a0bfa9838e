"""The projected Newton ascent inside the box (``analysis.boxnewton``), on quadratics whose
derivatives and maxima are known in closed form.

The one-sided stencils are exact for a quadratic up to rounding (Taylor's theorem: the
second-order gradient stencil and the second differences have no error term below the third
derivative), so the derivatives are compared with the quadratic's own to 1e-6 (common
practice for a step of 1e-3 in double precision).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from tristock.analysis.boxnewton import (
    NEWTON_STEP,
    derivatives,
    held_variables,
    maximise,
)

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]


class Quadratic:
    """f(z) = g·z - ½ zᵀAz, one (g, A) for every row; counts the points it is asked for."""

    def __init__(self, g: FloatArray, a: FloatArray):
        self.g, self.a, self.points = g, a, 0

    def __call__(self, rows: IntArray, z: FloatArray) -> tuple[FloatArray, FloatArray]:
        self.points += int(np.prod(z.shape[:-1]))
        f = z @ self.g - 0.5 * np.einsum("...i,ij,...j->...", z, self.a, z)
        return f, f


def _quadratic(n: int, seed: int) -> Quadratic:
    rng = np.random.default_rng(seed)
    q = rng.normal(size=(n, n))
    return Quadratic(rng.normal(size=n) * 3.0, q @ q.T + np.eye(n))


def test_derivatives_are_the_quadratics_where_the_step_reads_them() -> None:
    f = _quadratic(5, 1)
    z = np.array([[0.1, -0.3, 0.5, 0.0, -0.9], [1.0, -1.0, 1.0, -1.0, 1.0]])
    grad, hess = derivatives(f, np.arange(2), z)
    exact_grad = f.g[None, :] - z @ f.a
    assert np.allclose(grad, exact_grad, atol=1e-6, rtol=0)
    free = ~held_variables(z, grad)
    both = free[:, :, None] & free[:, None, :]
    read = both | np.eye(5, dtype=bool)[None]
    assert np.allclose(np.where(read, hess, 0.0), np.where(read, -f.a, 0.0), atol=1e-6)
    # a cross term with a held variable is never read (``newton_direction``): not evaluated
    assert np.all(hess[~read] == 0.0)


def test_a_row_with_one_free_variable_costs_the_gradients_points_only() -> None:
    n = 6
    f = Quadratic(np.array([5.0, 5.0, 5.0, 5.0, 5.0, 0.0]), np.eye(n))
    z = np.array([[1.0, 1.0, 1.0, 1.0, 1.0, 0.2]])  # five held at +1 (gradient 4 > 0)
    derivatives(f, np.arange(1), z)
    assert f.points == 1 + 2 * n


def test_maximise_reaches_the_boxed_maximum() -> None:
    """A diagonal quadratic's maximum over the box is its free maximum clipped to the box."""
    centre = np.array([0.3, -2.0, 1.7, -0.6])
    a = np.diag([1.0, 2.0, 0.5, 4.0])
    f = Quadratic(a @ centre, a)
    starts = np.array([[0.0, 0.0, 0.0, 0.0], [-1.0, 1.0, -1.0, 1.0], [0.9, -0.9, 0.9, -0.9]])
    value, _ = f(np.arange(3), starts)
    z, payload = maximise(f, starts, value, value)
    assert np.allclose(z, np.clip(centre, -1.0, 1.0)[None, :], atol=1e-6)
    assert np.all(payload >= value)


def test_maximise_with_coupled_variables_matches_a_dense_grid() -> None:
    """A coupled concave quadratic in two variables: the best of a 2001² grid over the box
    (numpy brute force) is where the ascent ends, within the grid's spacing."""
    f = Quadratic(np.array([4.0, -1.0]), np.array([[2.0, 1.5], [1.5, 2.0]]))
    grid = np.linspace(-1.0, 1.0, 2001)
    zz = np.stack(np.meshgrid(grid, grid, indexing="ij"), axis=-1).reshape(-1, 2)
    best = zz[int(np.argmax(f(np.zeros(1, dtype=np.int64), zz)[0]))]
    start = np.zeros((1, 2))
    value, _ = f(np.arange(1), start)
    z, _ = maximise(f, start, value, value)
    assert np.allclose(z[0], best, atol=2.0 / 2000 + 10 * NEWTON_STEP)
