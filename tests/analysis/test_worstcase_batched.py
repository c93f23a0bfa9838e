"""analysis.worstcase.worst_cases and analysis.montecarlo.monte_carlo_many: several boards
searched or sampled together give each board the answer it gets alone, to the bit (the
reference is ``worst_case`` or ``monte_carlo`` of each board by itself, its memory emptied;
every row of a batched model call is computed on its own). Boards of different circuits are
batched apart. The memory answers a board met again under another target and never a board
whose parts or rails differ."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tristock.analysis import boxsearch
from tristock.analysis.boxsearch import all_corners, balanced_points
from tristock.analysis.bundle import analyse, analyse_many
from tristock.analysis.memo import forget
from tristock.analysis.montecarlo import monte_carlo, monte_carlo_many
from tristock.analysis.spread import joint_point_at, point_at, point_fields, spread_board
from tristock.analysis.worstcase import (
    REMEMBERED,
    WorstCase,
    box_extremes,
    box_extremes_many,
    worst_case,
    worst_cases,
)
from tristock.circuits import spec_topologies
from tristock.circuits.board import AnyBoard, Design
from tristock.circuits.spreadvars import apply_joint
from tristock.designs.fixed import design_of, run_engine
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog


def figures(wc: WorstCase) -> tuple[object, ...]:
    return (wc.to_dict(), wc.deviations)


def demo_boards(count: int, example: str = "demo") -> tuple[Spec, list[AnyBoard]]:
    """An example's spec and the first ``count`` rows its search lists, as boards."""
    spec = load_spec(example_spec_path(example))
    model = build_model(spec, load_catalog(demo_catalog_dir()), spec_topologies(spec)[0])
    rows = run_engine(model, "enumerate", count, 30.0).rows
    return spec, [design_of(model, rows, n) for n in range(len(rows))]


def test_batched_worst_cases_equal_each_alone() -> None:
    spec, boards = demo_boards(5)
    assert len(boards) == 5
    forget()
    together = worst_cases(boards[:5], spec)
    alone = []
    for b in boards[:5]:
        forget()
        alone.append(worst_case(b, spec))
    assert [figures(w) for w in together] == [figures(w) for w in alone]
    assert worst_cases([], spec) == []


def test_box_extremes_of_several_boards_equal_each_alone() -> None:
    """The coverage bound of trimmed designs checks settled candidates together."""
    spec, boards = demo_boards(4)
    _, comparator = demo_boards(1, "comparator")
    pairs = [(b, spec) for b in [*boards, *comparator]]
    together = box_extremes_many(pairs, ("frequency_hz", "duty_high"))
    assert together == [box_extremes(b, s, ("frequency_hz", "duty_high")) for b, s in pairs]


def test_model_calls_cut_into_row_batches_change_no_extreme(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """Corners, balanced-swing points and Newton rows of several boards go to the model in
    calls of at most ``BATCH_ROWS`` rows; batches of 100 (cutting boards apart) give the
    same extremes as one call."""
    spec, boards = demo_boards(3)
    pairs = [(b, spec) for b in boards]
    whole = box_extremes_many(pairs, ("frequency_hz", "amplitude_vpp"))
    monkeypatch.setattr(boxsearch, "BATCH_ROWS", 100)
    assert box_extremes_many(pairs, ("frequency_hz", "amplitude_vpp")) == whole


def test_boards_of_two_circuits_batched_apart_equal_each_alone() -> None:
    spec, opamp_boards = demo_boards(2)
    _, comparator_boards = demo_boards(2, "comparator")
    boards = [opamp_boards[0], comparator_boards[0], opamp_boards[1], comparator_boards[1]]
    assert {b.topology.name for b in boards} == {"opamp_schmitt", "comparator_schmitt"}
    forget()
    together = worst_cases(boards, spec)
    alone = []
    for b in boards:
        forget()
        alone.append(figures(worst_case(b, spec)))
    assert [figures(w) for w in together] == alone


def test_memory_answers_only_the_same_board_and_box() -> None:
    spec, boards = demo_boards(1)
    board = boards[0]
    forget()
    first = worst_case(board, spec)
    assert spec.frequency is not None
    moved = spec.model_copy(
        update={"frequency": spec.frequency.model_copy(update={"target_hz": 2600.0})}
    )
    again = worst_case(board, moved)  # the bands do not enter the box: remembered
    assert figures(again) == figures(first) and len(REMEMBERED) == 1
    again.corners["frequency_hz_lo"].clear()  # a copy: the remembered one is untouched
    assert figures(worst_case(board, spec)) == figures(first)
    wider = spec.model_copy(
        update={"supply": spec.supply.model_copy(update={"tolerance_pct": 10.0})}
    )
    assert worst_case(board, wider).frequency_hz != first.frequency_hz
    assert isinstance(board, Design)
    looser = dataclasses.replace(board, r3=dataclasses.replace(board.r3, tolerance_pct=5.0))
    assert worst_case(looser, spec).frequency_hz != first.frequency_hz


def test_analyse_many_equals_analyse() -> None:
    spec, boards = demo_boards(3)
    forget()
    many = analyse_many(boards, spec, samples=500)
    for board, got in zip(boards, many, strict=True):
        forget()
        assert got.to_dict() == analyse(board, spec, samples=500).to_dict()


def test_monte_carlo_of_several_boards_equals_each_alone() -> None:
    # two circuits interleaved (sampled apart), three boards of one circuit sharing the model's
    # calls over more than one batch (16,384 // 3 rows of each at a time), one remembered
    spec, opamp_boards = demo_boards(3)
    _, comparator_boards = demo_boards(1, "comparator")
    boards = [opamp_boards[0], comparator_boards[0], opamp_boards[1], opamp_boards[2]]
    forget()
    remembered = monte_carlo(opamp_boards[1], spec, samples=6000, seed=5)
    together = monte_carlo_many(boards, spec, samples=6000, seed=5)
    assert together[2] == remembered
    alone = []
    for b in boards:
        forget()
        alone.append(monte_carlo(b, spec, samples=6000, seed=5))
    assert together == alone
    assert len({r.passed for r in alone}) > 1  # the boards differ, each got its own
    assert monte_carlo_many([], spec) == []


def test_one_point_for_several_boards_is_each_boards_point_to_the_bit() -> None:
    """``joint_point_at`` with rows of three boards in mixed order (each board's own parts,
    tolerances and tempcos) equals ``point_at`` of each board, field by field."""
    spec, boards = demo_boards(3)
    problems = [spread_board(b, spec) for b in boards]
    n = len(problems[0][1])
    z = np.random.default_rng(7).uniform(-1.0, 1.0, size=(40, n))
    member = np.arange(40) % 3
    joint = joint_point_at(problems, member, z)
    for d, (board, variables) in enumerate(problems):
        own = point_at(board, variables, z[member == d])
        for f in point_fields(own):
            alone = np.broadcast_to(getattr(own, f), ((member == d).sum(),))
            assert np.array_equal(getattr(joint, f)[member == d], alone), f
    other = dataclasses.replace(problems[1][1][0], moves=problems[1][1][1].moves)
    with pytest.raises(ValueError, match="different fields or laws"):
        apply_joint([problems[0][1][0], other], {}, z[:2, 0], np.arange(2))


@pytest.mark.parametrize("example", ["demo", "duty"])
def test_balanced_points_of_rows_together_equal_each_row_alone(example: str) -> None:
    """``boxsearch.balanced_points`` computes each point from its own row: the rows of several
    objectives passed at once give, row by row, the points each row gives alone (to the bit),
    with the index of the row each point came from."""
    spec, boards = demo_boards(1, example)
    board, variables = spread_board(boards[0], spec)
    rows = all_corners(len(variables))[::97][:12]
    together, source = balanced_points(board, variables, rows)
    assert len(together) > 0 and np.all(np.abs(together) <= 1.0)
    for r in range(len(rows)):
        alone, from_row = balanced_points(board, variables, rows[r : r + 1])
        assert np.array_equal(from_row, np.zeros(len(alone), dtype=np.int64))
        assert np.array_equal(together[source == r], alone)
