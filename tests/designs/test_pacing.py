"""Paced steps (``designs.pacing``: the trimmed pairs, the tuned verdicts): sizes from the
time left and the last step's rate, a stop instead of an overrun, the whole range when time
is plenty.
The rule is the project's own (a search honours its time limit); no clock is read here but
the one ``Paced`` reads, against deadlines far in the past or future."""

from __future__ import annotations

import math
import time

from tristock.designs.pacing import SHORT_LIMIT_S, Paced, step_size


def test_first_step_is_short_when_little_time_is_left() -> None:
    assert step_size(SHORT_LIMIT_S, 0.0, 10_000, full=2048, first=256) == 2048
    assert step_size(SHORT_LIMIT_S / 2, 0.0, 10_000, full=2048, first=256) == 256
    assert step_size(SHORT_LIMIT_S / 2, 0.0, 100, full=2048, first=256) == 100


def test_later_steps_fit_the_time_left_at_the_last_rate() -> None:
    # 1 ms per item, 0.5 s left: 500 items fit
    assert step_size(0.5, 1e-3, 10_000, full=2048, first=256) == 500
    assert step_size(5.0, 1e-3, 10_000, full=2048, first=256) == 2048
    assert step_size(5.0, 1e-3, 300, full=2048, first=256) == 300


def test_a_step_that_cannot_fit_is_not_begun() -> None:
    assert step_size(0.1, 1e-3, 10_000, full=2048, first=256) == 0  # 100 < 256 fit
    assert step_size(0.1, 1e-3, 50, full=2048, first=256) == 50  # what is left fits
    assert step_size(0.0, 0.0, 10, full=2048, first=256) == 0
    assert step_size(-1.0, 1e-9, 10, full=2048, first=256) == 0


def test_plenty_of_time_covers_the_range_in_full_steps() -> None:
    steps = Paced(5000, time.perf_counter() + 3600.0, full=2048, first=256)
    slices = list(steps)
    assert [(s.start, s.stop) for s in slices] == [(0, 2048), (2048, 4096), (4096, 5000)]
    assert not steps.cut


def test_no_deadline_takes_full_steps() -> None:
    """A walk without a time limit (deadline infinite) is never paced down."""
    assert step_size(math.inf, 1e-3, 10_000, full=2048, first=256) == 2048
    assert step_size(math.inf, 0.0, 100, full=2048, first=256) == 100
    steps = Paced(5000, math.inf, full=2048, first=256)
    assert [(s.start, s.stop) for s in steps] == [(0, 2048), (2048, 4096), (4096, 5000)]


def test_a_past_deadline_takes_no_step_and_says_cut() -> None:
    steps = Paced(5000, time.perf_counter() - 1.0, full=2048, first=256)
    assert list(steps) == []
    assert steps.cut
    empty = Paced(0, time.perf_counter() - 1.0, full=2048, first=256)
    assert list(empty) == [] and not empty.cut
