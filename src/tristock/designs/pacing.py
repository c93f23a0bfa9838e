"""Vectorised steps sized to end by a deadline.

A search step over n items costs about a fixed part plus n times a per-item part, and one
long step can overrun a short time limit by its whole length. ``Paced`` hands out slices of
``range(count)``: ``full`` items a step while time is plenty, ``first`` for the first step
when less than ``SHORT_LIMIT_S`` is left (no rate is known yet), and after each step as many
as the last step's time per item says will fit in the time left. That rate includes the fixed
part, so it over-estimates a smaller step: the pacing errs early. When not even the smallest
step worth taking (``first``, or what is left) fits, it stops and says ``cut``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterator

#: Below this much time left the first step is the short one.
SHORT_LIMIT_S = 1.0


def step_size(remaining_s: float, per_item_s: float, left: int, full: int, first: int) -> int:
    """The next step's size (module docstring); 0: stop, the deadline would be overrun."""
    if remaining_s <= 0.0:
        return 0
    if per_item_s <= 0.0 or math.isinf(remaining_s):
        return min(full if remaining_s >= SHORT_LIMIT_S else first, left)
    fits = int(remaining_s / per_item_s)
    return min(full, fits, left) if fits >= min(first, left) else 0


class Paced:
    """The slices of ``range(count)`` to take one vectorised step each (module docstring);
    ``cut`` is True once the deadline stopped them before the end."""

    def __init__(self, count: int, deadline: float, *, full: int, first: int) -> None:
        self.count, self.deadline, self.full, self.first = count, deadline, full, first
        self.cut = False

    def __iter__(self) -> Iterator[slice]:
        start, per_item = 0, 0.0
        while start < self.count:
            now = time.perf_counter()
            left = self.count - start
            size = step_size(self.deadline - now, per_item, left, self.full, self.first)
            if size == 0:
                self.cut = True
                return
            yield slice(start, start + size)
            per_item = (time.perf_counter() - now) / size
            start += size
