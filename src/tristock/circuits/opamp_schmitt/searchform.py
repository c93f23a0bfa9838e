"""The op-amp Schmitt loop's search form: one stage option per usable op amp U1.

The stage is U1 alone (both channels: integrator and comparator); its square levels are the
op amp's saturation levels on the rails, VH = V+ - swing_pos - Vref and VL = Vref - (V- +
swing_neg) (``rails.square_levels``), the same for every row: the ``StageLoop``'s level
intervals have equal ends.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, TypeVar

import numpy as np

from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import OpAmpModel, Rails, rails_from_supply, square_levels
from tristock.circuits.searchform import (
    F64,
    I64,
    Exclusion,
    RowModel,
    SearchForm,
    StageOption,
    fixed_levels_loop,
)
from tristock.stock.parts import OpAmp, Resistor

if TYPE_CHECKING:
    from tristock.circuits.topology import BoardParts
    from tristock.spec.model import Spec
    from tristock.stock.catalog import Catalog

T = TypeVar("T")


@dataclass(frozen=True)
class OpAmpStage(StageOption):
    """The stage of the op-amp Schmitt loop: U1 (``part``) with its model (``model``)."""

    part: OpAmp
    model: OpAmpModel


def opamp_levels(part: OpAmp, spec: Spec) -> tuple[OpAmpModel, float, float] | str:
    """The op amp's model and square levels (VH, VL) on the spec's nominal rails, or why it
    cannot be used at all (supply span outside its rating over the rails' tolerance, or an
    output that cannot swing both sides of the reference)."""
    supply = spec.supply
    span_lo = supply.span_v * (1 - supply.tolerance_pct / 100)
    span_hi = supply.span_v * (1 + supply.tolerance_pct / 100)
    if span_lo < part.supply_min_v or span_hi > part.supply_max_v:
        return (
            f"supply span {span_lo:g}..{span_hi:g} V is outside its rating "
            f"{part.supply_min_v:g}..{part.supply_max_v:g} V"
        )
    model = OpAmpModel.from_part(part)
    try:
        vh, vl = square_levels(rails_from_supply(supply), model)
    except ValueError:
        return "its output cannot swing both sides of the reference on these rails"
    return model, vh, vl


def _stage(
    index: int, part: OpAmp, model: OpAmpModel, levels: tuple[float, float], ve: tuple[float, float]
) -> OpAmpStage:
    """U1 as a stage option: both channels its own, levels fixed, Ve over ``ve``."""
    vh, vl = levels
    loop = fixed_levels_loop(
        vh,
        vl,
        slew_rise=model.slew_rise_v_per_s,
        slew_fall=model.slew_fall_v_per_s,
        delay=model.delay_s,
        gbw=model.gbw_hz,
        integrator_gbw=model.gbw_hz,
        ve_lo=ve[0],
        ve_hi=ve[1],
    )
    return OpAmpStage(
        index=index,
        parts={"U1": part},
        stock_needs=((part, part.packages_per_board),),
        cost_per_board=part.cost_per_board,
        lines=1,
        loop=loop,
        levels=(vh, vl),
        integrator_bias_a=model.bias_a,
        part=part,
        model=model,
    )


def opamp_stage(index: int, part: OpAmp, spec: Spec, r3_values: F64) -> OpAmpStage | str:
    """The op amp's stage on the nominal rails, or why it cannot be used at all."""
    found = opamp_levels(part, spec)
    if isinstance(found, str):
        return found
    model, vh, vl = found
    ve = model.offset_v + model.bias_a * r3_values
    ve = ve[(vh - ve > 0) & (vl + ve > 0)]
    if len(ve) == 0:
        return "its integrator error voltage Vos + Ib·R3 reaches a square level for every R3"
    return _stage(index, part, model, (vh, vl), (float(ve.min()), float(ve.max())))


def _models(stages: Sequence[StageOption]) -> list[OpAmpModel]:
    out = []
    for s in stages:
        if not isinstance(s, OpAmpStage):
            raise TypeError(f"U1: stage {s.key} is not an op-amp Schmitt stage")
        out.append(s.model)
    return out


def stocked_opamps(
    spec: Spec, catalog: Catalog, make: Callable[[int, OpAmp], T | str]
) -> tuple[list[T], list[Exclusion]]:
    """``make(index, part)`` for every op amp the spec allows (``limits.opamps``) with stock
    for every board, in catalog order; an op amp short of stock, or whose ``make`` answers a
    reason (str) instead, as an exclusion (designator "U1")."""
    lim = spec.limits
    boards = spec.build.boards
    made: list[T] = []
    excl: list[Exclusion] = []
    for part in catalog.opamps:
        if lim.opamps is not None and part.id not in lim.opamps:
            continue
        need = boards * part.packages_per_board
        if part.stock < need:
            excl.append(Exclusion("U1", part.id, f"stock {part.stock} < {need} needed"))
            continue
        item = make(len(made), part)
        if isinstance(item, str):
            excl.append(Exclusion("U1", part.id, item))
            continue
        made.append(item)
    return made, excl


class OpAmpSchmittForm(SearchForm):
    """Rows (U1, R1, R2, R3, C1); the stage is U1."""

    stage_designators = ("U1",)

    def stage_options(
        self, spec: Spec, catalog: Catalog, r3_values: F64, deadline: float = math.inf
    ) -> tuple[list[StageOption], list[Exclusion]]:
        """``SearchForm.stage_options`` (one option per op amp: few, not paced)."""
        made, excl = stocked_opamps(
            spec, catalog, lambda index, part: opamp_stage(index, part, spec, r3_values)
        )
        return list(made), excl

    def level_bounds(
        self, stages: Sequence[StageOption], u: I64, rails: Rails
    ) -> tuple[F64, F64, F64, F64]:
        """The op amp's saturation levels: the same for every row (equal ends)."""
        vh, vl = self.row_levels(stages, u, rails, {})
        return vh, vh, vl, vl

    def row_levels(
        self, stages: Sequence[StageOption], u: I64, rails: Rails, values: Mapping[str, F64]
    ) -> tuple[F64, F64]:
        """VH = V+ - swing_pos - Vref, VL = Vref - (V- + swing_neg) per row's op amp (not
        checked positive: a row on rails where one is not cannot oscillate, and
        ``predict_rows`` marks it invalid)."""
        models = _models(stages)
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
        """``physics.predict`` of each valid row (Ve = Vos1 + Ib1·R3 strictly inside -VL..VH
        and both levels positive); NaN elsewhere."""
        models = _models(stages)

        def col(name: str) -> F64:
            return np.array([getattr(x, name) for x in models], dtype=np.float64)[u]

        r1, r2, r3, c1 = (values[d] for d in ("R1", "R2", "R3", "C1"))
        vh, vl = levels
        vos1 = np.zeros(len(u)) if centred_offsets else col("offset_v")
        vos2 = np.zeros(len(u)) if centred_offsets else col("comparator_offset_v")
        ib1, ib2 = col("bias_a"), col("comparator_bias_a")
        slew_rise = col("slew_rise_v_per_s") * slew_scale
        slew_fall = col("slew_fall_v_per_s") * slew_scale
        ve = vos1 + ib1 * r3
        ok = (vh - ve > 0) & (vl + ve > 0) & (vh > 0) & (vl > 0)
        out = Prediction(*(np.full(len(u), np.nan) for _ in Prediction._fields))
        if ok.any():
            part = predict(
                r1[ok],
                r2[ok],
                r3[ok],
                c1[ok],
                vh[ok],
                vl[ok],
                slew_rise=slew_rise[ok],
                slew_fall=slew_fall[ok],
                delay=(col("delay_s") * delay_scale)[ok],
                gbw=col("gbw_hz")[ok],
                integrator_gbw=col("gbw_hz")[ok],
                vos1=vos1[ok],
                ib1=ib1[ok],
                vos2=vos2[ok],
                ib2=ib2[ok],
            )
            for name in Prediction._fields:
                getattr(out, name)[ok] = np.asarray(getattr(part, name))
        return RowModel(out, ve, ok, slew_rise, slew_fall)

    def board_stage(self, board: BoardParts, spec: Spec) -> StageOption | str:
        """U1's stage at its saturation levels on the nominal rails (no rating check: the
        search's eligibility is not asked of a board already chosen), Ve over the board's R3."""
        u1, r3 = board.parts()["U1"], board.parts()["R3"]
        assert isinstance(u1, OpAmp) and isinstance(r3, Resistor)
        model = OpAmpModel.from_part(u1)
        try:
            levels = square_levels(rails_from_supply(spec.supply), model)
        except ValueError:
            return "its output cannot swing both sides of the reference on these rails"
        ve = model.offset_v + model.bias_a * r3.value
        return _stage(0, u1, model, levels, (ve, ve))


SEARCH_FORM = OpAmpSchmittForm()
