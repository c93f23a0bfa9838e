"""Worst case over the whole spread box: extremes of frequency, amplitude and duty.

The box is every combination of the spread variables the design's topology declares
(``Topology.spread``; for the op-amp Schmitt loop: tolerances, each rail, temperature, op-amp
offsets, bias, slew and delay), each a deviation z in [-1, 1].
An extreme is sought for each of the six objectives max ±ln y, y one of frequency, triangle
amplitude and duty, in three steps (``WorstCase.method``):

1. **Corners.** With n <= ``max_corner_variables`` spread variables all 2^n corners are
   evaluated in one batch ("corners"); beyond that each extreme starts from every variable at
   its better end (one-at-a-time probes) and takes the best single or pair flip while one
   improves it ("local_search").
2. **Balanced swing.** The period goes as (VH + VL)²/(VH·VL), smallest where the two drives
   are equal, so with independent rails the frequency maximum can lie inside the rail box,
   near its diagonal VH - Ve = VL + Ve (Ve the integrator's error voltage). From each of the
   best corners of an extreme, each rail is moved (the other rail at either end) to the point
   where the drives balance: the topology's ``drive_imbalance`` is affine in a rail, so that
   point is exact.
3. **Projected Newton** ("+box" in the method): ``boxnewton.maximise`` from the
   ``CORNER_STARTS`` best corners and ``BALANCED_STARTS`` best balanced points of each
   extreme, all rows batched, over every variable as a continuous one (finite-difference
   gradient and Hessian inside the box, variables pushing out of it held at their bound, a
   projected line search) until no step gains more than 1e-14 in ln y.

What is proven and what is not:

- Every reported extreme is the model's value at the reported setting (a point of the box),
  and is at least as extreme as every corner (all of them up to ``max_corner_variables``) and
  every balanced-swing point examined.
- Ideal switch (no slew, delay, GBW, offset or bias): f = VH·VL/(k·R3·C1·(VH + VL)²) depends on
  the rails only through r = VH/VL, as r/(1 + r)², largest at r = 1 and falling away on both
  sides; over the rail box r runs between its corner values, so the rail extremes of f are a
  corner or the balanced line: steps 1 and 2 alone are exact there. Amplitude (VH + VL)·k and
  duty VL/(VH + VL) are monotone in each rail.
- Part values (no pot): with zero bias current and infinite GBW, a = VH - Ve, b = VL + Ve and
  the switching delays do not depend on R1, R2, R3 or C1. Period and duty depend on them only
  through the ramp term k·(VH + VL)·R3·C1 (the period is affine and increasing in it, the
  duty a ratio of two affine functions of it, so monotone), and the amplitude
  (VH + VL)·k + (overshoot terms)/(R3·C1) rises with k and falls with R3·C1: each part sits
  at an end of its tolerance at every extreme. Temperature moves several values by linear
  factors (1 + tc·ΔT) whose product is not monotone in general (R3 at +50 and C1 at
  -50 ppm/°C make R3·C1 largest at 25 °C, by 2.5e-9·ΔT²): it is searched as a continuous
  variable like the rest.
- With slew, delay, GBW, offsets and bias the objectives are smooth but not concave; step 3 is
  a bounded local optimiser from several starts, which finds a local extreme (every free
  variable stationary, every held one pushing out of the box). That is not a proof of the
  global extreme in general. The tests check it against brute force over the model (a dense
  rail grid times every corner of the other variables).
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.analysis.boxnewton import maximise
from tristock.analysis.spread import (
    METRICS,
    Board,
    SpreadVariable,
    check_inputs,
    evaluate,
    point_at,
    spread_board,
)
from tristock.circuits.board import AnyBoard
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

#: Up to this many spread variables ``worst_case`` evaluates every one of the 2^n corners.
MAX_CORNER_VARIABLES = 12
#: The same for ``box_extremes`` (coverage proofs of trimmed and tuned designs).
BOX_CORNER_VARIABLES = 16
#: Best corners per extreme kept as starts, and balanced-swing points derived from them.
CORNER_STARTS = 3
BALANCED_STARTS = 3
#: The six objectives: (column of METRICS, sign), lo before hi.
_OBJECTIVES = tuple((m, s) for m in range(len(METRICS)) for s in (-1.0, 1.0))


@dataclass(frozen=True)
class WorstCase:
    """Extremes of frequency (Hz), triangle amplitude (Vpp) and duty_high over the spread box.

    ``corners`` maps "<metric>_lo"/"<metric>_hi" (metric one of frequency_hz, amplitude_vpp,
    duty_high) to the setting of every spread variable there, as text ({"R1": "9.9 kΩ
    (-1 %)", "V-": "-9.6 V (-4.05 %)", ...}); a setting may lie inside the box. ``method`` is
    "corners+box" or "local_search+box" (module docstring: first step, then balanced swing and
    projected Newton). ``evaluations`` counts model evaluations. ``deviations`` gives the
    same settings as numbers: the deviation z in [-1, 1] of each of ``variables``, in order
    (``tristock.analysis.spread``; library only, not in ``to_dict``).
    """

    frequency_hz: tuple[float, float]
    amplitude_vpp: tuple[float, float]
    duty_high: tuple[float, float]
    corners: dict[str, dict[str, str]]
    method: str
    variables: tuple[str, ...]
    evaluations: int
    deviations: dict[str, tuple[float, ...]] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency_hz": list(self.frequency_hz),
            "amplitude_vpp": list(self.amplitude_vpp),
            "duty_high": list(self.duty_high),
            "method": self.method,
            "variables": list(self.variables),
            "evaluations": self.evaluations,
            "corners": {k: dict(v) for k, v in self.corners.items()},
        }


class _Model:
    """The board's metrics at deviation rows, counting evaluations."""

    def __init__(self, board: Board, variables: list[SpreadVariable]):
        self.board = board
        self.variables = variables
        self.evaluations = 0

    def __call__(self, z: FloatArray) -> FloatArray:
        self.evaluations += z.shape[0]
        return evaluate(self.board, self.variables, z)

    def objective(
        self, z: FloatArray, metric: IntArray, sign: FloatArray, ref: FloatArray
    ) -> tuple[FloatArray, FloatArray]:
        """(sign·ln(y/ref), y) at rows z (R, ..., n); ``metric``, ``sign``, ``ref`` per R."""
        shape = z.shape[:-1]
        flat = z.reshape(-1, z.shape[-1])
        per_row = int(np.prod(shape[1:], dtype=np.int64))
        m = np.repeat(metric, per_row)
        y = self(flat)[np.arange(flat.shape[0]), m]
        with np.errstate(divide="ignore", invalid="ignore"):
            phi = np.repeat(sign, per_row) * np.log(y / np.repeat(ref, per_row))
        phi = np.where(np.isfinite(phi), phi, -np.inf)
        return phi.reshape(shape), y.reshape(shape)

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
    model: _Model, objectives: Sequence[tuple[int, float]], max_corner_variables: int
) -> tuple[list[FloatArray], list[FloatArray], str]:
    """Per objective its best corners (rows, n) and their metrics (rows, 3), best first; the
    method's first word."""
    n = len(model.variables)
    if n > max_corner_variables:
        rows = [model.local_search(m, s)[None, :] for m, s in objectives]
        vals = model(np.vstack(rows))
        return rows, [vals[o : o + 1] for o in range(len(rows))], "local_search"
    z = all_corners(n)
    vals = model(z)
    order = [_best(s * vals[:, m], CORNER_STARTS) for m, s in objectives]
    return [z[k] for k in order], [vals[k] for k in order], "corners"


def balanced_points(board: Board, variables: list[SpreadVariable], rows: FloatArray) -> FloatArray:
    """From each row, each rail moved alone (the other rail at -1 and at +1) to where the
    integrator's drives balance (``Topology.drive_imbalance`` = 0), where that lies in [-1, 1].

    The imbalance is affine in a rail's z (VH and VL are; Ve does not depend on the rails), so
    the root from its values at z = -1 and z = +1 is exact. (k, n), k <= 4·len(rows)."""
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
        return np.empty((0, rows.shape[1]))
    lo = np.vstack([b for _, b in bases])
    hi = lo.copy()
    column = np.repeat([r for r, _ in bases], rows.shape[0])
    at = np.arange(len(lo))
    lo[at, column], hi[at, column] = -1.0, 1.0
    i_lo = board.drive_imbalance(point_at(board, variables, lo))
    i_hi = board.drive_imbalance(point_at(board, variables, hi))
    i_lo, i_hi = np.broadcast_to(i_lo, (len(lo),)), np.broadcast_to(i_hi, (len(lo),))
    ok = (i_lo * i_hi <= 0.0) & (i_lo != i_hi)
    root = lo[ok]
    root[np.arange(len(root)), column[ok]] = -1.0 + 2.0 * i_lo[ok] / (i_lo[ok] - i_hi[ok])
    clipped: npt.NDArray[np.float64] = np.clip(root, -1.0, 1.0)
    return clipped


def _search(
    board: Board,
    variables: list[SpreadVariable],
    objectives: Sequence[tuple[int, float]],
    max_corner_variables: int,
) -> tuple[FloatArray, FloatArray, str, int]:
    """Per objective the extreme's row (k, n) and metric value (k,); method; evaluations."""
    model = _Model(board, variables)
    corner_rows, corner_vals, first = _corner_starts(model, objectives, max_corner_variables)
    if not variables:
        vals = np.array([corner_vals[o][0, m] for o, (m, _) in enumerate(objectives)])
        return np.zeros((len(objectives), 0)), vals, first, model.evaluations
    balanced = [np.unique(balanced_points(board, variables, rows), axis=0) for rows in corner_rows]
    stacked = np.vstack(balanced)
    balanced_vals = model(stacked) if len(stacked) else np.empty((0, len(METRICS)))
    starts, start_vals, owner, first_row = [], [], [], 0
    for o, (m, s) in enumerate(objectives):
        mine = slice(first_row, first_row + len(balanced[o]))
        first_row = mine.stop
        keep = _best(s * balanced_vals[mine, m], BALANCED_STARTS)
        starts += [corner_rows[o], balanced[o][keep]]
        start_vals += [corner_vals[o][:, m], balanced_vals[mine, m][keep]]
        owner += [o] * (len(corner_rows[o]) + len(keep))
    owner_of = np.asarray(owner, dtype=np.int64)
    metric = np.asarray([objectives[o][0] for o in owner], dtype=np.int64)
    sign = np.asarray([objectives[o][1] for o in owner], dtype=float)
    ref = np.concatenate(start_vals)

    def objective(rows: IntArray, z: FloatArray) -> tuple[FloatArray, FloatArray]:
        return model.objective(z, metric[rows], sign[rows], ref[rows])

    z, vals = maximise(objective, np.vstack(starts), np.zeros(len(ref)), ref)
    rows_out, vals_out = [], []
    for o in range(len(objectives)):
        own = np.flatnonzero(owner_of == o)
        k = own[int(np.argmax(sign[own] * vals[own]))]
        rows_out.append(z[k])
        vals_out.append(vals[k])
    return np.vstack(rows_out), np.asarray(vals_out), f"{first}+box", model.evaluations


def worst_case(
    design: AnyBoard, spec: Spec, *, max_corner_variables: int = MAX_CORNER_VARIABLES
) -> WorstCase:
    """Worst-case extremes of f, triangle amplitude and duty over the spread box (the
    topology's variables: tolerances, rails, temperature, op-amp spread), by corners,
    balanced-swing points and projected Newton (the module docstring says how, and what that
    proves)."""
    check_inputs(design, spec)
    if isinstance(max_corner_variables, bool) or not isinstance(max_corner_variables, int):
        raise TypeError(f"max_corner_variables: expected an int, got {max_corner_variables!r}")
    if max_corner_variables < 0:
        raise ValueError(f"max_corner_variables: must be >= 0, got {max_corner_variables}")
    board, variables = spread_board(design, spec)
    rows, vals, method, evaluations = _search(board, variables, _OBJECTIVES, max_corner_variables)
    bounds, corners, deviations = {}, {}, {}
    for o, (m, s) in enumerate(_OBJECTIVES):
        key = f"{METRICS[m]}_{'hi' if s > 0 else 'lo'}"
        bounds[key] = float(vals[o])
        corners[key] = {v.name: v.describe(float(rows[o, i])) for i, v in enumerate(variables)}
        deviations[key] = tuple(float(x) for x in rows[o])
    return WorstCase(
        frequency_hz=(bounds["frequency_hz_lo"], bounds["frequency_hz_hi"]),
        amplitude_vpp=(bounds["amplitude_vpp_lo"], bounds["amplitude_vpp_hi"]),
        duty_high=(bounds["duty_high_lo"], bounds["duty_high_hi"]),
        corners=corners,
        deviations=deviations,
        method=method,
        variables=tuple(v.name for v in variables),
        evaluations=evaluations,
    )


def box_extremes(
    design: AnyBoard, spec: Spec, metrics: Sequence[str] = METRICS
) -> dict[str, tuple[float, float]]:
    """(min, max) over the spread box of each of ``metrics`` (frequency_hz, amplitude_vpp,
    duty_high): the search of ``worst_case`` with every corner up to ``BOX_CORNER_VARIABLES``
    variables. The coverage bound of trimmed and tuned designs."""
    check_inputs(design, spec)
    unknown = [m for m in metrics if m not in METRICS]
    if unknown or not metrics:
        raise ValueError(f"metrics: expected some of {', '.join(METRICS)}, got {list(metrics)}")
    board, variables = spread_board(design, spec)
    wanted = [METRICS.index(m) for m in dict.fromkeys(metrics)]
    objectives = [(m, s) for m in wanted for s in (-1.0, 1.0)]
    _, vals, _, _ = _search(board, variables, objectives, BOX_CORNER_VARIABLES)
    return {METRICS[m]: (float(vals[2 * i]), float(vals[2 * i + 1])) for i, m in enumerate(wanted)}


__all__ = [
    "BOX_CORNER_VARIABLES",
    "MAX_CORNER_VARIABLES",
    "WorstCase",
    "all_corners",
    "balanced_points",
    "box_extremes",
    "worst_case",
]
