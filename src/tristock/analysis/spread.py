"""The spread box of one design, generic over its topology: the board and the model over it.

The board's topology declares the box (``Topology.spread``: the point at its centre and the
spread variables, each a normalised deviation z in [-1, 1] naming the point fields it moves
and by which law; ``tristock.circuits.spreadvars``), and every figure comes from the
topology's vectorised ``predict``. This module only moves the point to deviations and
evaluates; ``worstcase`` searches the box for extremes, ``montecarlo`` samples it. The
variables of a topology, their ranges and units are listed in its own spread module
(``circuits/opamp_schmitt/spread.py`` for the op-amp Schmitt loop).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.circuits.board import AnyBoard, Design
from tristock.circuits.board import Board as GenericBoard
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.spreadvars import PointValues, SpreadVariable, apply_joint
from tristock.circuits.topology import Prediction, Topology
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]
#: The metrics of ``evaluate``, in column order.
METRICS = ("frequency_hz", "amplitude_vpp", "duty_high")


@dataclass(frozen=True)
class Board:
    """A topology's point plus how the reference node follows the rails and how a pot is
    wired, and the topology that reads it."""

    point: Any
    v_ref: float | None
    control: str
    topology: Topology

    @classmethod
    def of(cls, design: AnyBoard, rails: Rails, temp_c: float) -> Board:
        """The design's values at ``temp_c`` (its topology's ``board_point``)."""
        point = design.topology.board_point(design, rails, temp_c)
        return cls(point, rails.v_ref, design.control, design.topology)

    def predict(self, point: Any) -> Prediction:
        """The topology's vectorised model at ``point`` (this board's reference and wiring)."""
        return self.topology.predict(point, self.v_ref, self.control)

    def drive_imbalance(self, point: Any) -> FloatArray:
        """The topology's drive imbalance (V) at ``point`` (``Topology.drive_imbalance``)."""
        return np.asarray(
            self.topology.drive_imbalance(point, self.v_ref, self.control), dtype=float
        )


def point_fields(point: Any) -> tuple[str, ...]:
    """The field names of a topology's point (a dataclass)."""
    return tuple(f.name for f in dataclasses.fields(point))


def metric_table(pred: Prediction, rows: int) -> FloatArray:
    """(rows, 3) array of frequency (Hz), amplitude (Vpp), duty_high (``METRICS``)."""
    cols = [np.broadcast_to(np.asarray(getattr(pred, m), dtype=float), (rows,)) for m in METRICS]
    return np.stack(cols, axis=1)


def spread_board(design: AnyBoard, spec: Spec) -> tuple[Board, list[SpreadVariable]]:
    """The board at the centre of its spread box and the box's variables (both declared by
    the design's topology, ``Topology.spread``)."""
    rails = rails_from_supply(spec.supply)
    box = design.topology.spread(design, spec)
    board = Board(box.centre, rails.v_ref, design.control, design.topology)
    return board, list(box.variables)


def point_at(board: Board, variables: list[SpreadVariable], z: FloatArray) -> Any:
    """The point at the deviations ``z`` (rows, n): array fields of ``rows`` entries."""
    values: PointValues = {f: getattr(board.point, f) for f in point_fields(board.point)}
    for i, var in enumerate(variables):
        var.apply(values, z[:, i])
    return type(board.point)(**values)


def evaluate(board: Board, variables: list[SpreadVariable], z: FloatArray) -> FloatArray:
    """Metrics (rows, 3) at the deviations ``z`` (rows, n), columns as ``METRICS``."""
    pred = board.predict(point_at(board, variables, z))
    return metric_table(pred, z.shape[0])


#: Rows ``metric_columns`` evaluates at a time: enough that numpy's cost per call is small
#: against the work, few enough that a batch's arrays stay in the processor's cache (on the
#: 2-core machine a Monte Carlo of 100,000 samples ran about twice as fast in batches of
#: 16,384 as in one).
BATCH_ROWS = 16384


def metric_columns(
    board: Board, variables: list[SpreadVariable], z: FloatArray, batch: int = BATCH_ROWS
) -> FloatArray:
    """Metrics (3, rows) at the deviations ``z`` (rows, n), rows as ``METRICS``: ``evaluate``
    in batches of ``batch`` rows (every row is computed on its own, so the values are the
    same to the bit). ``z`` is best given with its columns contiguous (Fortran order)."""
    return joint_metric_columns([(board, variables)], z, batch)[0]


def joint_point_at(
    problems: Sequence[tuple[Board, list[SpreadVariable]]],
    member: npt.NDArray[np.intp],
    z: FloatArray,
) -> Any:
    """One point whose row r is ``point_at`` of board ``problems[member[r]]`` at deviations
    ``z[r]`` (rows, n): boards of one topology and wiring, variables of the same names, fields
    and laws in the same order, each board with its own centre and bounds
    (``spreadvars.apply_joint``); every row the same to the bit as ``point_at`` gives it."""
    boards = [board for board, _ in problems]
    values: PointValues = {
        f: np.array([getattr(b.point, f) for b in boards], dtype=float)[member]
        for f in point_fields(boards[0].point)
    }
    for i in range(z.shape[1]):
        apply_joint([variables[i] for _, variables in problems], values, z[:, i], member)
    return type(boards[0].point)(**values)


def joint_metric_columns(
    problems: Sequence[tuple[Board, list[SpreadVariable]]], z: FloatArray, batch: int = BATCH_ROWS
) -> list[FloatArray]:
    """``metric_columns`` of each (board, its variables) at the same deviations ``z``, the
    boards of one topology and wiring and their variables of the same names in the same order
    (each with its own bounds): one model call for all the boards' rows, about ``batch`` rows
    at a time (each board's columns are the ones it gets alone, to the bit)."""
    rows = z.shape[0]
    step = max(1, batch // len(problems))
    out = [np.empty((len(METRICS), rows)) for _ in problems]
    for start in range(0, rows, step):
        part = z[start : start + step]
        n = part.shape[0]
        if len(problems) == 1:
            point = point_at(*problems[0], part)
        else:
            member = np.repeat(np.arange(len(problems)), n)
            point = joint_point_at(problems, member, np.tile(part, (len(problems), 1)))
        pred = problems[0][0].predict(point)
        for m, metric in enumerate(METRICS):
            value = np.asarray(getattr(pred, metric), dtype=float)
            column = np.broadcast_to(value, (n * len(problems),))
            for i, columns in enumerate(out):
                columns[m, start : start + n] = column[i * n : (i + 1) * n]
    return out


def check_inputs(design: object, spec: object) -> None:
    """TypeError naming the argument unless ``design`` is a board (``circuits.board``: a
    Design or a generic Board) and ``spec`` a Spec."""
    if not isinstance(design, Design | GenericBoard):
        raise TypeError(
            f"design: expected a tristock.circuits.board.Design or Board, got "
            f"{type(design).__name__}"
        )
    if not isinstance(spec, Spec):
        raise TypeError(f"spec: expected a tristock.spec.model.Spec, got {type(spec).__name__}")


__all__ = [
    "BATCH_ROWS",
    "METRICS",
    "Board",
    "SpreadVariable",
    "check_inputs",
    "evaluate",
    "joint_metric_columns",
    "joint_point_at",
    "metric_columns",
    "metric_table",
    "point_at",
    "point_fields",
    "spread_board",
]
