"""Batched projected Newton ascent inside the box [-1, 1]^n (no physics here).

``maximise`` improves many start rows at once, each with its own objective, by calling a
vectorised objective on whole batches: one batch for the derivatives of every row, one for
its line search, per iteration. Each iteration of a row:

- derivatives from a stencil that steps inward from the nearer bound (it never leaves the
  box): g = σ·(-3f0 + 4f1 - f2)/(2h), H_ii = (f0 - 2f1 + f2)/h² (second order) and
  H_ij = σi·σj·(f_ij - f_i - f_j + f0)/h² (first order), σ = ±1 the inward direction,
  h = ``NEWTON_STEP``, f_i and f_ij one step along i and along i and j;
- a variable at a bound whose gradient points out of the box is held there; the free ones
  take the step |H_F|⁻¹·g_F, |H_F| the free block with every eigenvalue turned negative and
  at least 1e-9 in size (ascent also where the objective is locally convex). The cross
  terms f_ij are evaluated only where i and j are both free (the step reads no other):
  a row at a corner with one free variable costs 1 + 2n points, not 1 + 2n + n(n-1)/2;
- a ladder of lengths along that step (4 down to 2^-12) and along the gradient (2 down to
  2^-11 of the box) is tried, each point projected onto the box; the best is taken if it
  gains more than ``NEWTON_TOLERANCE``, else the row stops.

It finds a local maximum (every free variable stationary, every held one pushing out of the
box) or stops after ``NEWTON_ITERATIONS``; it never returns a row worse than its start.
"""

from __future__ import annotations

import functools
from collections.abc import Callable

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
#: objective(rows, z) -> (value to maximise, payload), both shaped z.shape[:-1]: ``rows`` (R,)
#: names the start row of each leading entry of z (R, ..., n).
Objective = Callable[[IntArray, FloatArray], tuple[FloatArray, FloatArray]]

#: Finite-difference step of the derivatives, in units of the box half-width.
NEWTON_STEP = 1e-3
#: A row stops when its best step gains no more than this.
NEWTON_TOLERANCE = 1e-14
#: At most this many iterations per row.
NEWTON_ITERATIONS = 16
_NEWTON_LADDER = 2.0 ** np.arange(2, -13, -1)
_GRADIENT_LADDER = 2.0 ** np.arange(1, -12, -2)


@functools.cache
def _stencil(n: int) -> FloatArray:
    """Offsets (1 + 2n, n), in steps, of the point and one and two steps along each variable."""
    offsets = np.zeros((1 + 2 * n, n))
    offsets[1 : 1 + n] = np.eye(n)
    offsets[1 + n :] = 2.0 * np.eye(n)
    return offsets


def held_variables(z: FloatArray, grad: FloatArray) -> npt.NDArray[np.bool_]:
    """Variables at a bound whose gradient points out of the box (R, n)."""
    return ((z >= 1.0) & (grad > 0.0)) | ((z <= -1.0) & (grad < 0.0))


def derivatives(
    objective: Objective, rows: IntArray, z: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Gradient (R, n) and Hessian (R, n, n) of the objective at z (R, n) (module docstring);
    a cross term H_ij is 0 unless i and j are both free (``held_variables``)."""
    count, n = z.shape
    h = NEWTON_STEP
    inward = np.where(z <= 0.0, 1.0, -1.0)
    f, _ = objective(rows, z[:, None, :] + h * _stencil(n)[None, :, :] * inward[:, None, :])
    f0, f1, f2 = f[:, :1], f[:, 1 : 1 + n], f[:, 1 + n :]
    grad = inward * (-3.0 * f0 + 4.0 * f1 - f2) / (2.0 * h)
    hess = np.zeros((count, n, n))
    diag = np.arange(n)
    hess[:, diag, diag] = (f0 - 2.0 * f1 + f2) / h**2
    free = ~held_variables(z, grad)
    r, i, j = np.nonzero(np.triu(free[:, :, None] & free[:, None, :], 1))
    if len(r):
        pair = z[r].copy()
        pair[np.arange(len(r)), i] += h * inward[r, i]
        pair[np.arange(len(r)), j] += h * inward[r, j]
        fij, _ = objective(rows[r], pair)
        cross = (fij - f1[r, i] - f1[r, j] + f0[r, 0]) * inward[r, i] * inward[r, j] / h**2
        hess[r, i, j] = cross
        hess[r, j, i] = cross
    return grad, hess


def newton_direction(
    z: FloatArray, grad: FloatArray, hess: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """The step |H_F|⁻¹·g_F on the free variables, 0 on the held ones; and g_F."""
    free = ~held_variables(z, grad)
    g = np.where(free, grad, 0.0)
    h = np.where(free[:, :, None] & free[:, None, :], hess, 0.0)
    diag = np.arange(z.shape[1])
    h[:, diag, diag] = np.where(free, hess[:, diag, diag], -1.0)
    lam, q = np.linalg.eigh(h)
    coef = np.einsum("rji,rj->ri", q, g) / np.maximum(np.abs(lam), 1e-9)
    return np.where(free, np.einsum("rij,rj->ri", q, coef), 0.0), g


def maximise(
    objective: Objective, z: FloatArray, value: FloatArray, payload: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Ascend from every row of z (R, n), whose objective values and payloads are ``value`` and
    ``payload``; returns the final rows and their payloads."""
    z, best, payload = z.copy(), value.astype(float), payload.copy()
    moving = np.arange(len(z), dtype=np.int64)
    for _ in range(NEWTON_ITERATIONS):
        if not moving.size or not z.shape[1]:
            break
        zm = z[moving]
        grad, hess = derivatives(objective, moving, zm)
        step, g = newton_direction(zm, grad, hess)
        g_dir = g / np.maximum(np.abs(g).max(axis=1, keepdims=True), 1e-300)
        trial = np.concatenate(
            [
                zm[:, None, :] + _NEWTON_LADDER[None, :, None] * step[:, None, :],
                zm[:, None, :] + _GRADIENT_LADDER[None, :, None] * g_dir[:, None, :],
            ],
            axis=1,
        )
        trial = np.clip(trial, -1.0, 1.0)
        vals, extra = objective(moving, trial)
        at = np.arange(len(moving))
        k = np.argmax(vals, axis=1)
        better = vals[at, k] > best[moving] + NEWTON_TOLERANCE
        won = moving[better]
        z[won], best[won], payload[won] = (
            trial[at, k][better],
            vals[at, k][better],
            extra[at, k][better],
        )
        moving = won
    return z, payload


__all__ = ["NEWTON_ITERATIONS", "NEWTON_STEP", "NEWTON_TOLERANCE", "derivatives", "maximise"]
