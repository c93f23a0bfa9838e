"""The zener-clamped loop's search form: one stage option per usable (U1, zener part for
D1/D2, series resistor R5).

- U1 as in the op-amp form (``opamp_schmitt.searchform.stocked_opamps``, ``opamp_levels``:
  ``limits.opamps``, stock for every board, the supply rating, levels both sides of the
  reference); a zener of the diode table with two pieces a board in stock; R5 from the
  resistors the search's resistor table holds (its value range, series and stock rules,
  ``clamp_resistors``); then the stage limits of ``clamplevels`` and Ve = Vos1 + Ib1·R3
  strictly inside the levels for some R3.
- The levels are the clamp's (``clamplevels``): ``row_levels`` gives each row's own,
  ``level_bounds`` and the ``StageLoop`` intervals that hold every row's.
- ``predict_rows`` is the topology's own ``predict`` at each row's point. Its ``levels`` are
  the rows' clamp levels (``row_levels``, on the rails the rows are evaluated at); the op
  amp's output levels behind them are recovered with the clamp's own map Vo(S)
  (``Clamp.drive_of``, the inverse of ``Clamp.level``), so a row on other rails (a
  worst-case probe) is the model on those rails.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.clamped_schmitt.clamplevels import (
    ClampStage,
    LoadRange,
    candidate_columns,
    columns,
    fixed_fields,
    level_range,
    rest_levels,
    row_point,
    square_levels_at_reference,
)
from tristock.circuits.clamped_schmitt.designpoint import (
    at_design_point,
    design_levels,
    threshold_currents,
)
from tristock.circuits.clamped_schmitt.physics import Clamp, ClampPoint
from tristock.circuits.clamped_schmitt.stageoptions import (
    clamp_stages,
    loads,
    make_stage,
    turn_reach,
)
from tristock.circuits.opampvariant import part_at
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import OpAmpModel, Rails, rails_from_supply, square_levels
from tristock.circuits.searchform import F64, I64, Exclusion, RowModel, SearchForm, StageOption
from tristock.circuits.topology import BoardParts, Topology
from tristock.stock.diodes import Diode
from tristock.stock.parts import OpAmp, Resistor

if TYPE_CHECKING:
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog


class ClampedSchmittForm(SearchForm):
    """Rows (U1, D1 = D2, R5, R1, R2, R3, C1); the stage is U1 with the clamp."""

    stage_designators = ("U1", "D1", "D2", "R5")
    #: The clamp's edges enter the bounds as a delay interval (``clamplevels``, "Timing",
    #: (T1)-(T4)) and its levels as the design point's intervals (``designpoint``).
    bounds_proven = True
    #: The probes cannot move R5 and the zeners with temperature and tolerance.
    probes_in_box = False

    def __init__(self, topology: Topology) -> None:
        self.topology = topology

    def stage_options(
        self, spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
    ) -> tuple[list[StageOption], list[Exclusion]]:
        """``clamp_stages``: U1 × zener × R5, paced by ``deadline``."""
        stages, excl = clamp_stages(spec, catalog, r3_values, deadline)
        return list(stages), excl

    def level_bounds(
        self, stages: Sequence[StageOption], u: I64, rails: Rails
    ) -> tuple[F64, F64, F64, F64]:
        """The clamp's levels on ``rails`` over every row of each stage, its resistors at
        their tolerance and tempco ends (``ClampStage.spread_load``)."""
        uniq, back = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
        cols = columns(stages, uniq)
        spread = [
            s.spread_load for s in (stages[n] for n in uniq.tolist()) if isinstance(s, ClampStage)
        ]
        load = [np.array([x[f] for x in spread], dtype=float) for f in range(5)]
        found = level_range(cols, load, rails)
        return found[0][back], found[1][back], found[2][back], found[3][back]

    #: The divider pair fixes the load R1 + R2: ``pair_levels`` narrows the intervals.
    levels_by_pair = True

    def pair_levels(
        self,
        stages: Sequence[StageOption],
        u: I64,
        r1: F64,
        r2: F64,
        r3_range: tuple[float, float],
        rails: Rails,
    ) -> tuple[F64, F64, F64, F64]:
        """The stage's intervals taken again over the rows through the pair: the same
        design-point rule and load corners (``designpoint.design_levels`` over
        ``clamplevels.rest_levels``, the stage's ``turn_v``) with the loads
        R1 + R2 = r1 + r2 exactly (``LoadRange`` rl_lo = rl_hi) and R3 in the stage's range
        cut to ``r3_range``, then intersected with the stage's own intervals.

        Proof that each holds every row through the pair: the stage's argument
        (``designpoint``, ``clamplevels``) bounds the level of every row whose R3 and
        R1 + R2 lie in a ``LoadRange`` (the corners' S0 by its monotonicity in G3 and Gl,
        g_max by Gl_max and G3_min, the reach X by A_max, R_max and span_lo), for any such
        range; the pair's rows have R1 + R2 = r1 + r2 and R3 in both ranges, so they lie in
        this one (the triangle bound A_max and the design rule are the stage's). Each of the
        two intervals then holds every level such a row's model uses, and so does their
        intersection. The bounds (``search.bounds``) take a loop's intervals as given, so
        a pair's loop (the stage's with these levels, ``pair_loop``) bounds its rows."""
        uniq, back = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
        picked = [stages[n] for n in uniq.tolist()]
        if not all(isinstance(s, ClampStage) for s in picked):
            raise TypeError("U1: a stage is not a zener-clamped stage")
        clamps = [s for s in picked if isinstance(s, ClampStage)]
        back = np.asarray(back).reshape(-1)

        def per_stage(values: list[float]) -> F64:
            return np.array(values, dtype=np.float64)[back]

        cols = columns(stages, u)
        rl = np.asarray(r1, dtype=float) + np.asarray(r2, dtype=float)
        load = (
            np.maximum(per_stage([s.load.r3_lo for s in clamps]), r3_range[0]),
            np.minimum(per_stage([s.load.r3_hi for s in clamps]), r3_range[1]),
            rl,
            rl,
            per_stage([s.load.triangle_v for s in clamps]),
        )
        turn_v = per_stage([s.turn_v for s in clamps])
        found = design_levels(cols, load, rest_levels(cols, load, rails), turn_v)
        own = [per_stage([float(getattr(s.loop, f)) for s in clamps]) for f in _LEVELS]
        lo_h, hi_h = np.maximum(found[0], own[0]), np.minimum(found[1], own[1])
        lo_l, hi_l = np.maximum(found[2], own[2]), np.minimum(found[3], own[3])
        return lo_h, np.maximum(hi_h, lo_h), lo_l, np.maximum(hi_l, lo_l)

    def row_levels(
        self, stages: Sequence[StageOption], u: I64, rails: Rails, values: Mapping[str, F64]
    ) -> tuple[F64, F64]:
        """The clamp's levels S_H and -S_L of each row with the triangle at the reference
        (``clamplevels.square_levels_at_reference``): the model's own."""
        point = row_point(columns(stages, u), values, rails)
        return square_levels_at_reference(point, rails.v_ref)

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
        """The topology's ``predict`` of each valid row (Ve = Vos1 + Ib1·R3 strictly inside
        -VL..VH of the clamp levels ``levels``, a finite period, and the clamp at its design
        point, ``designpoint``); NaN elsewhere."""
        n = len(u)
        if n == 0:
            empty = np.zeros(0)
            nothing = Prediction(*(empty for _ in Prediction._fields))
            return RowModel(nothing, empty, np.zeros(0, dtype=bool), empty, empty)
        cols = columns(stages, u)
        vh, vl = (np.asarray(x, dtype=float) for x in levels)
        net = Clamp.of(row_point(cols, values, (vh, -vl)))
        out_h, out_l = net.drive_of(vh, np.zeros(n)), -net.drive_of(-vl, np.zeros(n))
        moved = dict(cols)
        moved["slew_rise"] = np.broadcast_to(cols["slew_rise"] * slew_scale, (n,))
        moved["slew_fall"] = np.broadcast_to(cols["slew_fall"] * slew_scale, (n,))
        moved["delay"] = np.broadcast_to(cols["delay"] * delay_scale, (n,))
        moved["swing_pos"], moved["swing_neg"] = np.zeros(n), np.zeros(n)
        if centred_offsets:
            moved["vos1"], moved["vos2"] = np.zeros(n), np.zeros(n)
        ve = moved["vos1"] + moved["ib1"] * values["R3"]
        ok = (vh - ve > 0) & (vl + ve > 0) & (vh > 0) & (vl > 0) & (out_h > 0) & (out_l > 0)
        out = Prediction(*(np.full(n, np.nan) for _ in Prediction._fields))
        if ok.any():
            sub = {k: np.asarray(x)[ok] for k, x in moved.items()}
            row_values = {k: np.asarray(x)[ok] for k, x in values.items()}
            point = row_point(sub, row_values, (out_h[ok], -out_l[ok]))
            pred = self.topology.predict(point, 0.0)
            for name in Prediction._fields:
                getattr(out, name)[ok] = np.asarray(getattr(pred, name))
            with np.errstate(invalid="ignore"):
                rule = np.zeros(n, dtype=bool)
                rest = (vh[ok], vl[ok])
                rule[ok] = self.design_point(point, (out_h[ok], out_l[ok]), rest, pred)
            finite = np.isfinite(np.asarray(out.period_s)) & (np.asarray(out.period_s) > 0)
            finite &= np.isfinite(np.asarray(out.amplitude_vpp))
            ok &= finite & np.isfinite(np.asarray(out.duty_high)) & rule
            for name in Prediction._fields:
                getattr(out, name)[~ok] = np.nan
        return RowModel(out, ve, ok, moved["slew_rise"], moved["slew_fall"])

    @staticmethod
    def design_point(
        point: ClampPoint, outputs: tuple[F64, F64], rest: tuple[F64, F64], pred: Prediction
    ) -> NDArray[np.bool_]:
        """Whether rows at ``point`` (U1's output at +VH / -VL, ``outputs``; the clamp
        levels ``rest`` with the triangle at the reference) meet the clamp's design point
        over their thresholds (``designpoint``, the rule the topology's check holds a board
        to)."""
        net = Clamp.of(point)
        vt = (np.asarray(pred.threshold_low_v), np.asarray(pred.threshold_high_v))
        currents = threshold_currents(net, outputs, rest, vt)
        return at_design_point(currents, point.izt1, point.izt2)

    def board_stage(self, board: BoardParts, spec: Spec) -> StageOption | str:
        """The board's stage on the spec's nominal rails: its own loads (R3, R1 + R2) and the
        band's largest amplitude, Ve at its own R3 (no stock or limit checks)."""
        parts = board.parts()
        u1 = part_at(parts, "U1", OpAmp)
        r1, r2, r3 = (part_at(parts, d, Resistor) for d in ("R1", "R2", "R3"))
        model = OpAmpModel.from_part(u1)
        rails = rails_from_supply(spec.supply)
        try:
            outputs = square_levels(rails, model)
        except ValueError:
            return "its output cannot swing both sides of the reference on these rails"
        rl = r1.value_ohm + r2.value_ohm
        a_max = loads(spec, [r1], np.array([r3.value_ohm]))[0].triangle_v
        own = LoadRange(r3.value_ohm, r3.value_ohm, rl, rl, a_max)
        d1, d2 = part_at(parts, "D1", Diode), part_at(parts, "D2", Diode)
        r5 = part_at(parts, "R5", Resistor)
        cols = candidate_columns(model, [(d1, d2)], [r5.value_ohm])
        levels = level_range(cols, own, rails)
        ve = model.offset_v + model.bias_a * r3.value_ohm
        found = [float(np.ravel(x)[0]) for x in levels]
        fixed = fixed_fields(cols, (0, 0))
        opamp = (u1, model, *outputs)
        reach = turn_reach(spec)
        return make_stage(0, opamp, (d1, d2), r5, (own, own), found, (ve, ve), fixed, reach)


_LEVELS = ("vh_lo", "vh_hi", "vl_lo", "vl_hi")
