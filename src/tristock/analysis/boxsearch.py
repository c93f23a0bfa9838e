"""The search for extremes over spread boxes (``worstcase``'s module docstring: corners,
balanced-swing points, projected Newton), for several boards at once.

Boards of one topology, wiring and variable list share the Newton batches: every row is
computed on its own, so each board's extremes are the ones it gets searched alone (to the
bit, tested), in fewer and larger calls of the model.
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from tristock.analysis.boxnewton import maximise
from tristock.analysis.spread import (
    BATCH_ROWS,
    METRICS,
    Board,
    SpreadVariable,
    evaluate,
    joint_point_at,
    metric_table,
    point_at,
)

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

#: Best corners per extreme kept as starts, and balanced-swing points derived from them.
CORNER_STARTS = 3
BALANCED_STARTS = 3


class _Model:
    """The board's metrics at deviation rows, counting evaluations."""

    def __init__(self, board: Board, variables: list[SpreadVariable]):
        self.board = board
        self.variables = variables
        self.evaluations = 0

    def __call__(self, z: FloatArray) -> FloatArray:
        self.evaluations += z.shape[0]
        return evaluate(self.board, self.variables, z)

    def local_search(self, metric: int, sign: float) -> FloatArray:
        """Maximise sign·metric over corners: each variable to its better end (one-at-a-time
        probes from the centre), then the best single or pair flip while one improves it."""
        n = len(self.variables)
        probes = np.vstack([-np.eye(n), np.eye(n)])
        vals = sign * self(probes)[:, metric]
        z = np.where(vals[n:] >= vals[:n], 1.0, -1.0)
        best = float(sign * self(z[None, :])[0, metric])
        i_idx, j_idx = np.triu_indices(n)  # i == j: single flip; i < j: pair flip
        moves = np.ones((len(i_idx), n))
        moves[np.arange(len(i_idx)), i_idx] = -1.0
        moves[np.arange(len(i_idx)), j_idx] = -1.0
        for _ in range(4 * n):
            trial = moves * z[None, :]
            vals = sign * self(trial)[:, metric]
            k = int(np.argmax(vals))
            if not vals[k] > best + 1e-15 * abs(best):
                break
            z, best = trial[k], float(vals[k])
        return z


@functools.cache
def all_corners(n: int) -> FloatArray:
    """All 2^n sign vectors, (2^n, n) (read-only, cached)."""
    bits = (np.arange(2**n)[:, None] >> np.arange(n)[None, :]) & 1
    table = np.asarray(bits * 2.0 - 1.0, dtype=float)
    table.flags.writeable = False
    return table


def _best(values: FloatArray, count: int) -> IntArray:
    """Indices of the ``count`` largest values, largest first (ties: lower index first)."""
    if len(values) > count:
        part = np.argpartition(-values, count - 1)[:count]
        return np.asarray(part[np.lexsort((part, -values[part]))], dtype=np.int64)
    return np.asarray(np.argsort(-values, kind="stable"), dtype=np.int64)


def _corner_starts(
    models: Sequence[_Model], objectives: Sequence[tuple[int, float]], max_corner_variables: int
) -> list[tuple[list[FloatArray], list[FloatArray], str]]:
    """Per model (boards of one batch, ``_batch_key``) and objective its best corners (rows,
    n) and their metrics (rows, 3), best first; the method's first word. Every board's
    corners are evaluated in one call."""
    n = len(models[0].variables)
    if n > max_corner_variables:
        out = []
        for model in models:
            rows = [model.local_search(m, s)[None, :] for m, s in objectives]
            vals = model(np.vstack(rows))
            out.append((rows, [vals[o : o + 1] for o in range(len(rows))], "local_search"))
        return out
    z = all_corners(n)
    member = np.repeat(np.arange(len(models)), len(z))
    every = _joint_metrics(models, member, np.tile(z, (len(models), 1)))
    out = []
    for d in range(len(models)):
        vals = every[d * len(z) : (d + 1) * len(z)]
        order = [_best(s * vals[:, m], CORNER_STARTS) for m, s in objectives]
        out.append(([z[k] for k in order], [vals[k] for k in order], "corners"))
    return out


def balanced_points(
    board: Board, variables: list[SpreadVariable], rows: FloatArray
) -> tuple[FloatArray, IntArray]:
    """From each row, each rail moved alone (the other rail at -1 and at +1) to where the
    integrator's drives balance (``Topology.drive_imbalance`` = 0), where that lies in [-1, 1];
    and the index of the row each point comes from.

    The imbalance is affine in a rail's z (VH and VL are; Ve does not depend on the rails), so
    the root from its values at z = -1 and z = +1 is exact. (k, n), k <= 4·len(rows); every
    point is computed from its row alone, so rows may be passed together or apart."""
    rails = [i for i, v in enumerate(variables) if v.rail]
    bases: list[tuple[int, FloatArray]] = []
    for r in rails:
        others = [o for o in rails if o != r]
        if not others:
            bases.append((r, rows))
        for o in others:
            for end in (-1.0, 1.0):
                base = rows.copy()
                base[:, o] = end
                bases.append((r, base))
    if not bases:
        return np.empty((0, rows.shape[1])), np.empty(0, dtype=np.int64)
    lo = np.vstack([b for _, b in bases])
    hi = lo.copy()
    column = np.repeat([r for r, _ in bases], rows.shape[0])
    source = np.tile(np.arange(rows.shape[0], dtype=np.int64), len(bases))
    at = np.arange(len(lo))
    lo[at, column], hi[at, column] = -1.0, 1.0
    i_lo = board.drive_imbalance(point_at(board, variables, lo))
    i_hi = board.drive_imbalance(point_at(board, variables, hi))
    i_lo, i_hi = np.broadcast_to(i_lo, (len(lo),)), np.broadcast_to(i_hi, (len(lo),))
    ok = (i_lo * i_hi <= 0.0) & (i_lo != i_hi)
    root = lo[ok]
    root[np.arange(len(root)), column[ok]] = -1.0 + 2.0 * i_lo[ok] / (i_lo[ok] - i_hi[ok])
    clipped: npt.NDArray[np.float64] = np.clip(root, -1.0, 1.0)
    return clipped, source[ok]


class _Starts(NamedTuple):
    """The Newton starts of one problem: rows (R, n), their objective (index into the
    objectives), metric column, sign and value at the start."""

    z: FloatArray
    owner: IntArray
    metric: IntArray
    sign: FloatArray
    ref: FloatArray


def _starts(
    models: Sequence[_Model],
    objectives: Sequence[tuple[int, float]],
    corners: Sequence[tuple[list[FloatArray], list[FloatArray], str]],
) -> list[_Starts]:
    """Per model (boards of one batch) and objective its best corners and its best
    balanced-swing points, every board's points evaluated in one call."""
    balanced: list[list[FloatArray]] = []
    for model, (corner_rows, _, _) in zip(models, corners, strict=True):
        # every objective's corners in one call, then each objective's points apart
        points, source = balanced_points(model.board, model.variables, np.vstack(corner_rows))
        objective_of = np.repeat(np.arange(len(corner_rows)), [len(r) for r in corner_rows])
        balanced.append(
            [np.unique(points[objective_of[source] == o], axis=0) for o in range(len(corner_rows))]
        )
    stacked = [np.vstack(b) for b in balanced]
    member = np.repeat(np.arange(len(models)), [len(x) for x in stacked])
    every = (
        _joint_metrics(models, member, np.vstack(stacked))
        if len(member)
        else np.empty((0, len(METRICS)))
    )
    out, first_row = [], 0
    for own, (corner_rows, corner_vals, _) in zip(balanced, corners, strict=True):
        starts, start_vals, owner = [], [], []
        for o, (m, s) in enumerate(objectives):
            mine = slice(first_row, first_row + len(own[o]))
            first_row = mine.stop
            keep = _best(s * every[mine, m], BALANCED_STARTS)
            starts += [corner_rows[o], own[o][keep]]
            start_vals += [corner_vals[o][:, m], every[mine, m][keep]]
            owner += [o] * (len(corner_rows[o]) + len(keep))
        out.append(
            _Starts(
                np.vstack(starts),
                np.asarray(owner, dtype=np.int64),
                np.asarray([objectives[o][0] for o in owner], dtype=np.int64),
                np.asarray([objectives[o][1] for o in owner], dtype=float),
                np.concatenate(start_vals),
            )
        )
    return out


def _joint_metrics(models: Sequence[_Model], member: IntArray, z: FloatArray) -> FloatArray:
    """Metrics (rows, 3) at deviations z (rows, n), row r on ``models[member[r]]``'s board, in
    calls of the topology's model of up to ``BATCH_ROWS`` rows (the models share topology,
    wiring and variables; every row is computed on its own)."""
    if len(z) > BATCH_ROWS:
        parts = range(0, len(z), BATCH_ROWS)
        return np.vstack(
            [
                _joint_metrics(models, member[i : i + BATCH_ROWS], z[i : i + BATCH_ROWS])
                for i in parts
            ]
        )
    if len(models) == 1:
        return models[0](z)
    for model, count in zip(models, np.bincount(member, minlength=len(models)), strict=True):
        model.evaluations += int(count)
    point = joint_point_at([(model.board, model.variables) for model in models], member, z)
    return metric_table(models[0].board.predict(point), len(z))


def _ascend(
    models: Sequence[_Model], starts: Sequence[_Starts], objectives: Sequence[tuple[int, float]]
) -> list[tuple[FloatArray, FloatArray]]:
    """Projected Newton from every problem's starts in shared batches; per problem and
    objective the best row (k, n) and its metric value (k,)."""
    member = np.concatenate([np.full(len(s.z), d) for d, s in enumerate(starts)])
    metric = np.concatenate([s.metric for s in starts])
    sign = np.concatenate([s.sign for s in starts])
    ref = np.concatenate([s.ref for s in starts])
    owner = np.concatenate([s.owner for s in starts])

    def objective(rows: IntArray, z: FloatArray) -> tuple[FloatArray, FloatArray]:
        """(sign·ln(y/ref), y) at rows z (R, ..., n), each start row on its own board with its
        own metric, sign and start value ref (-inf where the model has no value)."""
        shape = z.shape[:-1]
        flat = z.reshape(-1, z.shape[-1])
        per_row = int(np.prod(shape[1:], dtype=np.int64))
        at = np.repeat(rows, per_row)
        y = _joint_metrics(models, member[at], flat)[np.arange(flat.shape[0]), metric[at]]
        with np.errstate(divide="ignore", invalid="ignore"):
            phi = sign[at] * np.log(y / ref[at])
        phi = np.where(np.isfinite(phi), phi, -np.inf)
        return phi.reshape(shape), y.reshape(shape)

    z, vals = maximise(objective, np.vstack([s.z for s in starts]), np.zeros(len(ref)), ref)
    out = []
    for d in range(len(starts)):
        rows_out, vals_out = [], []
        for o in range(len(objectives)):
            own = np.flatnonzero((member == d) & (owner == o))
            k = own[int(np.argmax(sign[own] * vals[own]))]
            rows_out.append(z[k])
            vals_out.append(vals[k])
        out.append((np.vstack(rows_out), np.asarray(vals_out)))
    return out


def search_extremes(
    problems: Sequence[tuple[Board, list[SpreadVariable]]],
    objectives: Sequence[tuple[int, float]],
    max_corner_variables: int,
) -> list[tuple[FloatArray, FloatArray, str, int]]:
    """Per problem (board, variables) and objective the extreme's row (k, n) and metric value
    (k,); method; evaluations. Problems of one topology, wiring and variable list share the
    calls of the corners, the balanced-swing points and the Newton batches: every row is
    computed on its own, so each problem gets the answer it gets alone, in fewer and larger
    calls of the model."""
    models = [_Model(board, variables) for board, variables in problems]
    batches: dict[tuple[object, ...], list[int]] = {}
    for d, model in enumerate(models):
        batches.setdefault(_batch_key(model), []).append(d)
    firsts: dict[int, str] = {}
    found: dict[int, tuple[FloatArray, FloatArray]] = {}
    for members in batches.values():
        group = [models[d] for d in members]
        corners = _corner_starts(group, objectives, max_corner_variables)
        for d, (_, _, first) in zip(members, corners, strict=True):
            firsts[d] = first
        if not group[0].variables:
            for d, (_, corner_vals, _) in zip(members, corners, strict=True):
                vals = np.array([corner_vals[o][0, m] for o, (m, _) in enumerate(objectives)])
                found[d] = (np.zeros((len(objectives), 0)), vals)
            continue
        results = _ascend(group, _starts(group, objectives, corners), objectives)
        found.update(zip(members, results, strict=True))
    return [
        (*found[d], firsts[d] if not model.variables else f"{firsts[d]}+box", model.evaluations)
        for d, model in enumerate(models)
    ]


def _batch_key(model: _Model) -> tuple[object, ...]:
    """Boards with equal keys (topology, wiring, variable names) share model calls."""
    board = model.board
    names = tuple(v.name for v in model.variables)
    return (board.topology.name, board.v_ref, board.control, type(board.point), names)


__all__ = ["BALANCED_STARTS", "CORNER_STARTS", "all_corners", "balanced_points", "search_extremes"]
