"""What one row of comparators.csv is: a comparator IC for the Schmitt stage.

Values in SI base units (volt, ampere, second); levels are measured from the rails. An edge of
the output is taken as linear in time, 10 % to 90 % in ``rise_s``/``fall_s`` (the datasheet
convention), so the whole edge lasts ``rise_s/0.8``; ``delay_s`` runs from the input's
threshold crossing to 50 % of the output step, so the edge starts
``delay_s - rise_s/1.6`` after the crossing (``edge_start_s``), which must not be negative.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final, Literal

ComparatorOutput = Literal["push-pull", "open-drain"]
COMPARATOR_OUTPUTS: Final[tuple[ComparatorOutput, ...]] = ("push-pull", "open-drain")

#: The 10 %-90 % share of a linear edge: the whole edge lasts rise_s / EDGE_SHARE.
EDGE_SHARE: Final[float] = 0.8


def full_edge_s(ten_to_ninety_s: float) -> float:
    """The whole (0-100 %) duration (s) of a linear edge whose 10-90 % time is given (s)."""
    return ten_to_ninety_s / EDGE_SHARE


def edge_start_s(delay_s: float, ten_to_ninety_s: float) -> float:
    """When a linear edge starts after the threshold crossing (s): it reaches 50 % at
    ``delay_s``, half its whole duration after it starts."""
    return delay_s - 0.5 * full_edge_s(ten_to_ninety_s)


@dataclass(frozen=True, slots=True)
class Comparator:
    """A comparator part: U2 of a comparator-IC design takes one channel.

    ``output`` is push-pull (high level V+ - ``voh_headroom_v``) or open-drain (no high drive:
    a pull-up R5 from V+ sets the high level, ``voh_headroom_v`` is None). ``vol_v`` is the low
    level above V- at the rated sink current ``output_a``. ``delay_s``: threshold crossing to
    50 % of the output step; ``rise_s``/``fall_s``: 10-90 % edge times. ``offset_v``,
    ``bias_a``: input offset and bias current. ``input_cm_neg_v``: the lowest input
    common-mode voltage, from V- (negative: below the rail); ``input_cm_pos_headroom_v``: how
    far below V+ the common-mode range ends (negative: beyond the rail); None means the input
    reaches that rail. ``supply_min_v``/``supply_max_v`` bound the total span V+ - V-.
    """

    id: str
    channels: int
    output: ComparatorOutput
    supply_min_v: float
    supply_max_v: float
    delay_s: float
    rise_s: float
    fall_s: float
    vol_v: float
    voh_headroom_v: float | None
    offset_v: float
    bias_a: float
    output_a: float
    input_cm_neg_v: float | None
    input_cm_pos_headroom_v: float | None
    unit_cost: float
    stock: int

    @property
    def is_open_drain(self) -> bool:
        return self.output == "open-drain"

    @property
    def cost_per_board(self) -> float:
        """One channel per board: one package."""
        return self.unit_cost
