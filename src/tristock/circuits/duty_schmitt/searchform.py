"""The set-duty loop's search form: one stage option per usable (U1, signal diode for D3/D4).

- U1 as in the op-amp form (``opamp_schmitt.searchform.stocked_opamps``, ``opamp_levels``:
  ``limits.opamps``, stock for every board, the supply rating, levels both sides of the
  reference); its square levels are its saturation levels, the same for every row.
- D3 and D4 are two pieces of one signal diode of the diode table (the search offers no
  mixed pair; a board with two codes is still analysed, ``board_stage``), with two pieces a
  board in stock.
- The rows have two integrator elements, R3A (carries the integrator's current while the
  square is high) and R3B (while it is low): ``search.branches`` lists them with bounds of
  its own (this loop's period does not follow ``looptiming.loop_timing``), so the
  ``StageLoop`` here only carries the levels and the op amp's timing, and Ve is the offset
  alone (the bias current enters the model as a current, not through one R3).
- ``predict_rows`` is the topology's own ``predict`` at each row's point, with the levels
  given (U1's swing taken as 0 on rails moved to the levels).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.diode import diode_at, thermal_voltage
from tristock.circuits.duty_schmitt.physics import (
    DutyPoint,
    Edge,
    branch_currents,
    predict_point,
)
from tristock.circuits.opamp_schmitt.searchform import opamp_levels, stocked_opamps
from tristock.circuits.opampvariant import part_at
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.searchform import (
    F64,
    I64,
    Exclusion,
    RowModel,
    SearchForm,
    StageOption,
    fixed_levels_loop,
)
from tristock.stock.diodes import Diode
from tristock.stock.parts import OpAmp, Part

if TYPE_CHECKING:
    from tristock.circuits.topology import BoardParts
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog


@dataclass(frozen=True)
class DutyStage(StageOption):
    """U1 (``part``, its ``model``) with the steering diodes D3 and D4."""

    part: OpAmp
    model: OpAmpModel
    d3: Diode
    d4: Diode


def duty_stage(
    index: int,
    part: OpAmp,
    model: OpAmpModel,
    levels: tuple[float, float],
    diodes: tuple[Diode, Diode],
) -> DutyStage:
    """The stage option: U1's packages and D3, D4 (two pieces of one code, or one each)."""
    d3, d4 = diodes
    steering: tuple[tuple[Part, int], ...] = ((d3, 2),) if d3 == d4 else ((d3, 1), (d4, 1))
    needs = ((part, part.packages_per_board), *steering)
    vh, vl = levels
    loop = fixed_levels_loop(
        vh, vl,
        slew_rise=model.slew_rise_v_per_s, slew_fall=model.slew_fall_v_per_s,
        delay=model.delay_s, gbw=model.gbw_hz, integrator_gbw=model.gbw_hz,
        ve_lo=model.offset_v, ve_hi=model.offset_v,
    )  # fmt: skip
    return DutyStage(
        index=index,
        parts={"U1": part, "D3": d3, "D4": d4},
        stock_needs=needs,
        cost_per_board=sum(p.unit_cost * n for p, n in needs),
        lines=len({p.id for p, _ in needs}),
        loop=loop,
        levels=(vh, vl),
        integrator_bias_a=model.bias_a,
        part=part,
        model=model,
        d3=d3,
        d4=d4,
    )


def stocked_signal_diodes(spec: Spec, catalog: Catalog) -> tuple[list[Diode], list[Exclusion]]:
    """The signal diodes of the diode table with two pieces (D3 and D4) for every board; the
    others short of stock as exclusions (designator "D3")."""
    need = 2 * spec.build.boards
    found: list[Diode] = []
    excl: list[Exclusion] = []
    for d in catalog.diodes:
        if d.is_zener:
            continue
        if d.stock < need:
            excl.append(Exclusion("D3", d.id, f"stock {d.stock} < {need} needed (D3 and D4)"))
            continue
        found.append(d)
    return found, excl


def _stages(stages: Sequence[StageOption]) -> list[DutyStage]:
    out = []
    for s in stages:
        if not isinstance(s, DutyStage):
            raise TypeError(f"U1: stage {s.key} is not a set-duty stage")
        out.append(s)
    return out


class DutySchmittForm(SearchForm):
    """Rows (U1, D3 = D4, R1, R2, R3A, R3B, C1); the stage is U1 with the steering diodes."""

    integrator = ("R3A", "R3B")
    stage_designators = ("U1", "D3", "D4")
    #: The probes move one R3; this loop's two branches are left to the analysis.
    probes_in_box = False

    def stage_options(
        self, spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
    ) -> tuple[list[StageOption], list[Exclusion]]:
        """``SearchForm.stage_options`` (op amps x signal diodes: few, not paced)."""
        diodes, excl = stocked_signal_diodes(spec, catalog)
        if not diodes:
            excl.append(Exclusion("D3", None, "no signal diode with stock for D3 and D4"))
            return [], excl

        def levels(_: int, part: OpAmp) -> tuple[OpAmp, OpAmpModel, float, float] | str:
            found = opamp_levels(part, spec)
            return found if isinstance(found, str) else (part, *found)

        opamps, opamp_excl = stocked_opamps(spec, catalog, levels)
        excl += opamp_excl
        made: list[StageOption] = []
        for part, model, vh, vl in opamps:
            for d in diodes:
                made.append(duty_stage(len(made), part, model, (vh, vl), (d, d)))
        return made, excl

    def level_bounds(
        self, stages: Sequence[StageOption], u: I64, rails: Rails
    ) -> tuple[F64, F64, F64, F64]:
        """U1's saturation levels: the same for every row (equal ends)."""
        vh, vl = self.row_levels(stages, u, rails, {})
        return vh, vh, vl, vl

    def row_levels(
        self, stages: Sequence[StageOption], u: I64, rails: Rails, values: Mapping[str, F64]
    ) -> tuple[F64, F64]:
        """VH = V+ - swing_pos - Vref, VL = Vref - (V- + swing_neg) per row's op amp."""
        models = [s.model for s in _stages(stages)]
        ref = rails.reference_v
        sp = np.array([m.swing_pos_v for m in models])[u]
        sn = np.array([m.swing_neg_v for m in models])[u]
        return np.asarray(rails.v_pos - sp - ref), np.asarray(ref - (rails.v_neg + sn))

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
        """``physics.predict_point`` of each row at 25 °C, the levels ``levels`` (VH, VL from
        the reference); valid where both levels are positive, both branch currents
        overcome the integrator's bias (the ramps run both ways) and the period is finite."""
        point = row_point(stages, u, values, levels, slew_scale, delay_scale, centred_offsets)
        n = len(u)
        vh, vl = (np.asarray(x, dtype=float) for x in levels)
        with np.errstate(invalid="ignore", divide="ignore"):
            i_a, i_b = branch_currents(point, 0.0)
            ib1 = np.asarray(point.ib1)
            ok = (vh > 0) & (vl > 0) & (i_a - ib1 > 0) & (i_b + ib1 > 0)
            pred = predict_point(point, 0.0)
            ok &= np.isfinite(np.asarray(pred.period_s)) & (np.asarray(pred.period_s) > 0)
            ok &= np.isfinite(np.asarray(pred.amplitude_vpp))
        out = Prediction(*(np.where(ok, np.asarray(x), np.nan) for x in pred))
        slew_rise = np.broadcast_to(np.asarray(point.slew_rise, dtype=float), (n,))
        slew_fall = np.broadcast_to(np.asarray(point.slew_fall, dtype=float), (n,))
        return RowModel(out, np.asarray(point.vos1, dtype=float), ok, slew_rise, slew_fall)

    def ramp_currents(
        self, stages: Sequence[StageOption], u: I64, r3: F64, rails: Rails
    ) -> tuple[F64, F64]:
        """(g_A, g_B) of each row (A): the ideal ramps' currents with R3A = R3B = ``r3``,
        g_A = I_A - Ib1 (the falling ramp, square high) and g_B = I_B + Ib1 (the rising
        ramp), I_A and I_B the branch currents of ``physics.branch_currents`` (each a
        function of its own resistor only). The ideal ramp times are C1·k·span/g (s) and
        their sum is the model's ideal period."""
        ones = np.ones(len(u))
        values = {"R1": ones, "R2": ones, "R3A": r3, "R3B": r3, "C1": ones}
        levels = self.row_levels(stages, u, rails, values)
        point = row_point(stages, u, values, levels)
        with np.errstate(invalid="ignore", divide="ignore"):
            i_a, i_b = branch_currents(point, 0.0)
        ib1 = np.asarray(point.ib1)
        return np.asarray(i_a - ib1), np.asarray(i_b + ib1)

    def mid_swing_spread(
        self, stages: Sequence[StageOption], u: I64, k: F64, slope_min: F64, rails: Rails
    ) -> tuple[F64, NDArray[np.bool_]]:
        """(Δ, claimed) per row of stage ``u[n]`` and divider ratio ``k[n]``: the larger of
        the two edges' mid-swing times less the transport delay (s), with the triangle's
        slope at ``slope_min`` (V/s). Each edge's mid-swing time m (``physics.Edge``) lies
        between the delay and that value for every slope of at least ``slope_min``, so
        |m_f - m_r| ≤ Δ: for a linear slew m = td + span/(2·SR) exactly; for a finite GBW
        (L1) the scaled level time v(L; μ, D) does not rise with μ and is positive
        (verified beside ``tests/search/test_search_bounds.py``'s G1-G3, on the same grid)
        wherever the scaled level λ·span/(2·SR) is at least ``LEVEL_TIME_MIN``; ``claimed``
        is False where it is not."""
        vh, vl = self.row_levels(stages, u, rails, {})
        point = row_point(stages, u, {d: np.ones(len(u)) for d in _VALUES}, (vh, vl))
        span, gbw = vh + vl, np.asarray(point.gbw, dtype=float)
        spread = np.zeros(len(u))
        claimed = np.ones(len(u), dtype=bool)
        for slew in (np.asarray(point.slew_rise), np.asarray(point.slew_fall)):
            edge = Edge(k, slope_min, span, slew, gbw, np.asarray(point.delay, dtype=float))
            spread = np.maximum(spread, edge.mid_time() - edge.delay)
            finite, lam, _, _ = edge.scales()
            claimed &= np.logical_not(finite) | (lam * 0.5 * span / slew >= LEVEL_TIME_MIN)
        return spread, claimed

    def board_stage(self, board: BoardParts, spec: Spec) -> StageOption | str:
        """U1 with the board's D3 and D4 at its saturation levels on the nominal rails (no
        stock or rating checks)."""
        parts = board.parts()
        u1 = part_at(parts, "U1", OpAmp)
        found = opamp_levels(u1, spec)
        if isinstance(found, str):
            return found
        model, vh, vl = found
        diodes = (part_at(parts, "D3", Diode), part_at(parts, "D4", Diode))
        return duty_stage(0, u1, model, (vh, vl), diodes)


def row_point(
    stages: Sequence[StageOption],
    u: I64,
    values: Mapping[str, F64],
    levels: tuple[F64, F64],
    slew_scale: F64 | float = 1.0,
    delay_scale: F64 | float = 1.0,
    centred_offsets: bool = False,
) -> DutyPoint:
    """The model's point of each row at 25 °C: the stage's op amp and diodes, the row's
    values, the levels as rails (V+ = VH, V- = -VL, no swing, reference 0)."""
    picked = _stages(stages)

    def col(get: Callable[[DutyStage], float]) -> F64:
        return np.array([get(s) for s in picked], dtype=np.float64)[u]

    n = len(u)
    vh, vl = (np.broadcast_to(np.asarray(x, dtype=float), (n,)) for x in levels)
    d3 = [diode_at(s.d3, 25.0) for s in picked]
    d4 = [diode_at(s.d4, 25.0) for s in picked]
    zeros = np.zeros(n)
    return DutyPoint(
        r1=values["R1"], r2=values["R2"], r3a=values["R3A"], r3b=values["R3B"], c1=values["C1"],
        v_pos=vh, v_neg=-vl, swing_pos=zeros, swing_neg=zeros,
        slew_rise=col(lambda s: s.model.slew_rise_v_per_s) * slew_scale,
        slew_fall=col(lambda s: s.model.slew_fall_v_per_s) * slew_scale,
        delay=col(lambda s: s.model.delay_s) * delay_scale,
        gbw=col(lambda s: s.model.gbw_hz),
        vos1=zeros if centred_offsets else col(lambda s: s.model.offset_v),
        ib1=col(lambda s: s.model.bias_a),
        vos2=zeros if centred_offsets else col(lambda s: s.model.comparator_offset_v),
        ib2=col(lambda s: s.model.comparator_bias_a),
        vf3=np.array([d[3] for d in d3])[u], rs3=np.array([d[1] for d in d3])[u],
        vf4=np.array([d[3] for d in d4])[u], rs4=np.array([d[1] for d in d4])[u],
        vt_therm=np.full(n, float(thermal_voltage(25.0))),
    )  # fmt: skip


_VALUES = ("R1", "R2", "R3A", "R3B", "C1")
#: The scaled level λ·V/SR from which the tabulated edge's level time is verified not to rise
#: with μ, (L1) (tests/circuits/test_duty_searchform.py).
LEVEL_TIME_MIN = 0.01

SEARCH_FORM = DutySchmittForm()
