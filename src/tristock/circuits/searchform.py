"""The search form of a topology: what the exact search needs of a circuit.

The search (``tristock.search``) lists rows = stage option × divider pair (R1, R2 → k = R1/R2)
× integrator element (R3) × C1 and proves its answers under the topology's full model. For
that a topology declares, through ``Topology.search_form()``:

- its **stage options** (``stage_options``): every usable Schmitt stage on the spec's rails,
  one ``StageOption`` each: the parts by designator (an op amp U1 today; U1 + a comparator U2
  (+ a pull-up R5), or U1 + zeners D1/D2 + R5 in the variants), the stock each board takes,
  the cost per board and BOM lines of the stage, and what the bounds need: a ``StageLoop``
  with the loop's timing parameters and the square levels as **intervals** [lo, hi] valid
  for every row the stage can be in (equal ends when the levels do not depend on the row);
- the designators of its divider pair, integrator element and capacitor (``divider``,
  ``integrator``, ``capacitor``), whose parts come from the resistor and capacitor tables;
- the square levels of rows on given rails (``row_levels``; rows differ when the levels
  depend on the row's resistors, as with an open-drain pull-up or a zener clamp), and, where
  the divider pair already narrows them, the level intervals of a (stage, R1/R2 pair) over
  the integrator elements left unknown (``pair_levels``, ``levels_by_pair``);
- the full model of rows (``predict_rows``): the topology's own vectorised ``predict``;
- the stage option of a board already chosen (``board_stage``), so an answer is re-checked
  as the topology's own board (``circuits.board.board_from`` builds the board of a row).

A stage's parts may come from the resistor table too (a pull-up or a clamp's series resistor
R5): ``stock_needs`` names them, and the search counts a stock code that fills a stage position
and a divider/integrator position once per position (stock) and once on the BOM (lines).

The bounds the engines apply (``search.bounds``) are written over a ``StageLoop``; they stay
sound for level intervals (see that module: the period rises with the span at fixed drives
and falls with each drive, the overshoots do not depend on the span).
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.boardparts import BoardParts
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import Rails
from tristock.stock.parts import Part

if TYPE_CHECKING:
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]


@dataclass(frozen=True)
class Exclusion:
    """Why a part or a whole designator was left out, in plain words."""

    designator: str
    part_id: str | None
    reason: str


class StageLoop(NamedTuple):
    """A stage's loop as the bounds need it (arrays over stages or rows; V, V/s, s, Hz).

    ``vh_lo``..``vh_hi`` and ``vl_lo``..``vl_hi`` hold the square levels (from the reference)
    over every row the stage can be in; ``ve_lo``..``ve_hi`` the integrator error voltage
    Ve = Vos1 + Ib1·R3 over the R3 values eligible. The drives of the falling and rising ramps
    are a = VH - Ve and b = VL + Ve; the span VH + VL is the distance the thresholds scale
    with and the comparator edge's length.

    ``delay_spread`` (s, default 0) widens the edges' transport delay to an interval
    [``delay``, ``delay`` + ``delay_spread``] for loops whose edges are not one fixed delay and
    slew (the zener-clamped square: U1's output slews from a rail into the clamp, over a time
    that depends on the row); ``search.bounds`` takes the end that makes each bound valid.

    ``overshoot_time_min``: where the loop's own slew
    and delay do not give a lower end of each edge's overshoot time o over the stage's rows
    (a comparator's unequal edges, an open-drain high level), one that does (s), which the
    amplitude's lower bound takes instead (``search.bounds.overshoot_floors``); NaN: the
    loop's own."""

    vh_lo: F64
    vh_hi: F64
    vl_lo: F64
    vl_hi: F64
    slew_rise: F64
    slew_fall: F64
    delay: F64
    gbw: F64  # the comparator's
    integrator_gbw: F64
    ve_lo: F64
    ve_hi: F64
    delay_spread: F64 = np.zeros(())
    overshoot_time_min: F64 = np.asarray(np.nan)

    def take(self, idx: I64) -> StageLoop:
        return StageLoop(*(np.asarray(x)[idx] for x in self))

    @property
    def span_lo(self) -> F64:
        return np.asarray(self.vh_lo + self.vl_lo)

    @property
    def span_hi(self) -> F64:
        return np.asarray(self.vh_hi + self.vl_hi)

    @property
    def delay_hi(self) -> F64:
        """The longest transport delay of the stage's edges (s)."""
        return np.asarray(self.delay + self.delay_spread)

    def weak(self) -> tuple[F64, F64]:
        """The smallest drives: a = VH_lo - Ve_hi, b = VL_lo + Ve_lo, each at least 0 (a row
        oscillates only with both its drives positive, so 0 stays below them where the
        intervals' ends alone would not: a weakest drive of 0 bounds nothing above)."""
        a = np.maximum(self.vh_lo - self.ve_hi, 0.0)
        return np.asarray(a), np.asarray(np.maximum(self.vl_lo + self.ve_lo, 0.0))

    def strong(self) -> tuple[F64, F64]:
        """The largest drives: a = VH_hi - Ve_lo, b = VL_hi + Ve_hi."""
        return np.asarray(self.vh_hi - self.ve_lo), np.asarray(self.vl_hi + self.ve_hi)


def fixed_levels_loop(
    vh: float, vl: float, *, slew_rise: float, slew_fall: float, delay: float, gbw: float,
    integrator_gbw: float, ve_lo: float, ve_hi: float,
) -> StageLoop:  # fmt: skip
    """A ``StageLoop`` whose levels do not depend on the row (equal interval ends)."""
    values = (vh, vh, vl, vl, slew_rise, slew_fall, delay, gbw, integrator_gbw, ve_lo, ve_hi)
    return StageLoop(*(np.asarray(x, dtype=np.float64) for x in values))


@dataclass(frozen=True)
class StageOption:
    """One usable Schmitt stage on the spec's rails.

    ``parts`` are the stage's parts by designator; ``stock_needs`` each part with the pieces
    one board takes; ``cost_per_board`` and ``lines`` (distinct stock codes) what the stage
    adds to a board's cost and BOM; ``loop`` what the bounds need on the nominal rails;
    ``levels`` the nominal square levels (VH, VL) where they do not depend on the row (the
    trimmed and tuned searches use them), else any point of ``loop``'s intervals;
    ``integrator_bias_a`` the integrator's input bias current Ib1 (A), which with its offset
    makes the error voltage Ve = Vos1 + Ib1·R3."""

    index: int
    parts: Mapping[str, Part]
    stock_needs: tuple[tuple[Part, int], ...]
    cost_per_board: float
    lines: int
    loop: StageLoop
    levels: tuple[float, float]
    integrator_bias_a: float

    @property
    def key(self) -> str:
        """The stage's stock codes in designator order: its place in the rank order."""
        return "+".join(self.parts[d].id for d in sorted(self.parts))


class RowModel(NamedTuple):
    """The full model of a batch of rows: the prediction (NaN where ``valid`` is False: the
    integrator error voltage Ve reaches a square level, no oscillation), Ve itself and the
    slew rates of the integrator's two ramps (V/s) the acceptance checks the slopes against."""

    pred: Prediction
    ve: F64
    valid: NDArray[np.bool_]
    slew_rise: F64
    slew_fall: F64


class SearchForm(ABC):
    """What a topology gives the exact search (module docstring)."""

    #: Designators of the divider pair (k = R1/R2), the integrator element and the capacitor.
    divider: tuple[str, str] = ("R1", "R2")
    integrator: tuple[str, ...] = ("R3",)
    capacitor: str = "C1"
    #: The designators a stage option fills (its ``parts``' keys, optional ones included).
    stage_designators: tuple[str, ...]
    #: Whether ``search.bounds`` is proven for this circuit's timing (its period follows
    #: ``looptiming.loop_timing`` with the ``StageLoop``'s parameters). False: the engines
    #: still use the windows, but no answer is called proven optimal.
    bounds_proven: bool = True
    #: Whether the worst-case probes (``search.guarantee``: R1, R2, R3, C1 at tolerance ends
    #: and temperature, slew and delay scaled, rails moved) are points of this circuit's
    #: spread box. False (stage parts the probes cannot move: a pull-up, zeners, a
    #: comparator's own spreads): the probes are skipped and the analysis alone decides.
    probes_in_box: bool = True

    @abstractmethod
    def stage_options(
        self, spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
    ) -> tuple[list[StageOption], list[Exclusion]]:
        """Every usable stage on the spec's nominal rails (stock for ``spec.build.boards``,
        supply rating, levels both sides of the reference, Ve inside the levels for some R3
        of ``r3_values``), and why each other candidate was left out. A form whose options
        grow with the resistor table (a clamp or pull-up resistor in the stage) stops once
        ``time.perf_counter()`` passes ``deadline`` and returns those made so far: the
        caller sees the deadline passed and knows the list may be short."""

    @abstractmethod
    def level_bounds(
        self, stages: Sequence[StageOption], u: I64, rails: Rails
    ) -> tuple[F64, F64, F64, F64]:
        """(VH_lo, VH_hi, VL_lo, VL_hi) of stage ``u`` on ``rails`` over every row the stage
        can be in (every eligible divider pair, integrator element and load): the level
        intervals of a ``StageLoop`` at other rails (the worst-case probes use them)."""

    #: Whether ``pair_levels`` narrows the stage's level intervals once the divider pair is
    #: known (False: it answers the stage's own, and the search shares pair figures between
    #: stages of equal loops).
    levels_by_pair: bool = False

    def pair_levels(
        self,
        stages: Sequence[StageOption],
        u: I64,
        r1: F64,
        r2: F64,
        r3_range: tuple[float, float],
        rails: Rails,
    ) -> tuple[F64, F64, F64, F64]:
        """(VH_lo, VH_hi, VL_lo, VL_hi) of stage ``u[n]`` with the divider pair (``r1[n]``,
        ``r2[n]``, Ω) on the spec's nominal ``rails`` (those the stage options were made on),
        over every row through that pair: its integrator element anywhere in ``r3_range``
        (Ω, the eligible values' ends). Each interval must hold what the stage's own holds
        for those rows (the bounds of ``search.bounds`` take them as a ``StageLoop``'s, see
        ``pair_loop``). By default the stage's own intervals (``StageOption.loop``)."""
        distinct, where = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
        names = ("vh_lo", "vh_hi", "vl_lo", "vl_hi")
        table = np.array(
            [[float(getattr(stages[n].loop, f)) for f in names] for n in distinct.tolist()],
            dtype=np.float64,
        ).reshape(-1, 4)[np.asarray(where).reshape(-1)]
        return table[:, 0], table[:, 1], table[:, 2], table[:, 3]

    def pair_loop(self, loop: StageLoop, levels: tuple[F64, F64, F64, F64]) -> StageLoop:
        """The stages' ``loop`` (arrays over pairs) with the pairs' level intervals
        ``levels`` (``pair_levels``). A form whose loop's other fields follow its levels
        overrides this; by default only the levels change."""
        vh_lo, vh_hi, vl_lo, vl_hi = (np.asarray(x, dtype=np.float64) for x in levels)
        return loop._replace(vh_lo=vh_lo, vh_hi=vh_hi, vl_lo=vl_lo, vl_hi=vl_hi)

    @abstractmethod
    def row_levels(
        self, stages: Sequence[StageOption], u: I64, rails: Rails, values: Mapping[str, F64]
    ) -> tuple[F64, F64]:
        """The square levels VH, VL (V from the reference) of rows with stage ``u`` on
        ``rails`` and the row's part values (``values`` by designator)."""

    @abstractmethod
    def predict_rows(
        self,
        stages: Sequence[StageOption],
        u: I64,
        values: Mapping[str, F64],
        levels: tuple[F64, F64],
        *,
        slew_scale: F64 | float = 1.0,
        delay_scale: F64 | float = 1.0,
        centred_offsets: bool = False,
    ) -> RowModel:
        """The topology's full model of each row: stage ``u`` with the part values ``values``
        (Ω, F by designator) at the square levels ``levels``; slew rates and delays scaled by
        the factors given; ``centred_offsets`` puts the offsets at 0 V (the analysis box's
        centre) instead of the catalogued typical values."""

    def divider_limit(self, stage: StageOption) -> tuple[float, Exclusion | None]:
        """(k_max, exclusion): no row of ``stage`` with k = R1/R2 above k_max can be
        accepted, by a condition of the form's own acceptance that ``predict_rows`` applies
        (the comparator loop: U2's input common-mode range), and the exclusion that says so
        when no k of the stage's window is left; by default none (inf, None)."""
        return math.inf, None

    def peak_limits(
        self, stages: Sequence[StageOption], u: I64, levels: tuple[F64, F64]
    ) -> tuple[F64, F64]:
        """(top, bottom): the model's ground holds a row's triangle peaks strictly inside
        (-bottom, top) (V from the reference); by default the square levels ``levels`` (VH,
        VL) themselves."""
        return levels

    # ---- forms with two integrator elements (``search.branches``) ------------------------
    def ramp_currents(
        self, stages: Sequence[StageOption], u: I64, r3: F64, rails: Rails
    ) -> tuple[F64, F64]:
        """(g_A, g_B) per row (A): the ideal ramps' currents with either integrator element
        ``r3`` (Ω), each a function of the stage and its own element only."""
        raise NotImplementedError(f"{type(self).__name__}: one integrator element")

    def mid_swing_spread(
        self, stages: Sequence[StageOption], u: I64, k: F64, slope_min: F64, rails: Rails
    ) -> tuple[F64, NDArray[np.bool_]]:
        """(Δ, claimed) per row: a bound of |m_f - m_r| (s), the edges' mid-swing times,
        for every triangle slope of at least ``slope_min``; ``claimed`` where it is proven."""
        raise NotImplementedError(f"{type(self).__name__}: one integrator element")

    @abstractmethod
    def board_stage(self, board: BoardParts, spec: Spec) -> StageOption | str:
        """The stage option (index 0) of a board already chosen, on the spec's nominal rails,
        its loop's Ve range over the board's own integrator element (no stock checks); or
        why the stage cannot be used on those rails (a reason, as ``stage_options`` gives)."""
