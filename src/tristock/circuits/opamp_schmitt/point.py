"""The op-amp Schmitt loop as one vectorised point: every input of ``physics.predict`` plus the
rails and a pot, as floats or broadcastable arrays (the spread box of ``tristock.analysis``
moves these fields), and the model at such a point."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TypeVar

import numpy as np

from tristock.circuits.opamp_schmitt.physics import Oscillator, predict
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.timing import timing_network
from tristock.circuits.topology import BoardParts, FloatArray, Prediction, Value
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor, value_at

P = TypeVar("P", bound=Part)


@dataclass(frozen=True)
class SpreadPoint:
    """Every argument of ``predict`` plus the rails; floats or broadcastable arrays."""

    r1: Value
    r2: Value
    r3: Value
    c1: Value
    v_pos: Value
    v_neg: Value
    swing_pos: Value
    swing_neg: Value
    slew_rise: Value
    slew_fall: Value
    delay: Value
    gbw: Value
    vos1: Value
    ib1: Value
    vos2: Value
    ib2: Value
    rv: Value = 0.0  # RV1 end to end (Ω); 0 without a pot
    r4: Value = 0.0  # divider end stop (Ω)
    alpha: Value = 0.0  # wiper position


POINT_FIELDS = tuple(SpreadPoint.__dataclass_fields__)


def square_levels_of(point: SpreadPoint, v_ref: float | None) -> tuple[FloatArray, FloatArray]:
    """(VH, VL), vectorised ``rails.square_levels``: VH = V+ - swing_pos - Vref,
    VL = Vref - (V- + swing_neg); Vref is the fixed reference, else 0 V for split rails and
    (V+ + V-)/2 for a single supply (V- = 0)."""
    v_pos = np.asarray(point.v_pos, dtype=float)
    v_neg = np.asarray(point.v_neg, dtype=float)
    if v_ref is not None:
        ref: Value = v_ref
    else:
        ref = np.where(v_neg < 0.0, 0.0, (v_pos + v_neg) / 2.0)
    return v_pos - point.swing_pos - ref, ref - (v_neg + point.swing_neg)


def predict_point(point: SpreadPoint, v_ref: float | None, control: str = "series") -> Prediction:
    """``predict`` at ``point`` with the square levels of ``square_levels_of`` and a pot
    folded in by ``timing_network`` (R3 -> R_eff, C1 -> C1/β, Vos1 and Ib1 -> /β)."""
    vh, vl = square_levels_of(point, v_ref)
    r_eff, beta = timing_network(point.r3, point.rv, point.alpha, control, point.r4)
    return predict(
        point.r1,
        point.r2,
        r_eff,
        np.asarray(point.c1) / beta,
        vh,
        vl,
        slew_rise=point.slew_rise,
        slew_fall=point.slew_fall,
        delay=point.delay,
        gbw=point.gbw,
        vos1=np.asarray(point.vos1) / beta,
        ib1=np.asarray(point.ib1) / beta,
        vos2=point.vos2,
        ib2=point.ib2,
        integrator_gbw=point.gbw,
    )


def swing_imbalance(point: SpreadPoint, v_ref: float | None, control: str = "series") -> FloatArray:
    """(VH - Ve) - (VL + Ve) in volts: the difference of the two integrator drives, zero where
    the ramps up and down are equally steep. Ve = (Vos1 + Ib1·R_eff)/β is the integrator's
    error voltage (``physics.predict``). Affine in each rail while the reference is fixed
    or 0 V; independent of V+ for a mid-rail single supply."""
    vh, vl = square_levels_of(point, v_ref)
    r_eff, beta = timing_network(point.r3, point.rv, point.alpha, control, point.r4)
    ve = (np.asarray(point.vos1) + np.asarray(point.ib1) * r_eff) / beta
    return np.asarray(vh - vl - 2.0 * ve, dtype=float)


def board_point(design: BoardParts, rails: Rails, temp_c: float) -> SpreadPoint:
    """The board's values at ``temp_c``; R3, RV1, R4 and the selected range capacitor are
    kept apart (``predict_point`` combines them through ``timing.timing_network``)."""
    osc = oscillator_of(design, rails, temp_c)
    m = osc.opamp
    parts = design.parts()
    r3 = part_of(parts, "R3", Resistor)
    cap = part_of(parts, f"C{design.selected + 1}", Capacitor)
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    rv = part_of(parts, "RV1", Pot) if "RV1" in parts else None
    r4 = part_of(parts, "R4", Resistor) if "R4" in parts else None
    return SpreadPoint(
        r1=osc.r1,
        r2=osc.r2,
        r3=value_at(r3.value_ohm, r3.tempco_ppm, temp_c),
        c1=value_at(cap.value_f, c_tc, temp_c),
        rv=value_at(rv.value_ohm, rv.tempco_ppm, temp_c) if rv else 0.0,
        r4=value_at(r4.value_ohm, r4.tempco_ppm, temp_c) if r4 else 0.0,
        alpha=design.wiper if rv else 0.0,
        v_pos=osc.rails.v_pos,
        v_neg=osc.rails.v_neg,
        swing_pos=m.swing_pos_v,
        swing_neg=m.swing_neg_v,
        slew_rise=m.slew_rise_v_per_s,
        slew_fall=m.slew_fall_v_per_s,
        delay=m.delay_s,
        gbw=m.gbw_hz,
        vos1=m.offset_v,
        ib1=m.bias_a,
        vos2=m.comparator_offset_v,
        ib2=m.comparator_bias_a,
    )


def part_of(parts: Mapping[str, Part], designator: str, kind: type[P]) -> P:
    """The part at ``designator``, which must be a ``kind``."""
    part = parts[designator]
    if not isinstance(part, kind):
        raise TypeError(f"{designator}: expected a {kind.__name__}, got {type(part).__name__}")
    return part


def oscillator_of(design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Oscillator:
    """The oscillator at temperature ``temp_c`` (°C): each value moved by its tempco.

    A class II capacitor has no linear tempco; its nominal value is used here and its
    temperature band is handled by the worst-case analysis. A pot in the timing path folds
    into R3 and C1 through ``timing.timing_network``.
    """
    parts = design.parts()
    r1, r2 = part_of(parts, "R1", Resistor), part_of(parts, "R2", Resistor)
    r3_part = part_of(parts, "R3", Resistor)
    cap = part_of(parts, f"C{design.selected + 1}", Capacitor)
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    r3 = value_at(r3_part.value_ohm, r3_part.tempco_ppm, temp_c)
    c1 = value_at(cap.value_f, c_tc, temp_c)
    opamp = OpAmpModel.from_part(part_of(parts, "U1", OpAmp))
    if "RV1" in parts:
        pot = part_of(parts, "RV1", Pot)
        rv = value_at(pot.value_ohm, pot.tempco_ppm, temp_c)
        r4_part = part_of(parts, "R4", Resistor) if "R4" in parts else None
        r4 = value_at(r4_part.value_ohm, r4_part.tempco_ppm, temp_c) if r4_part else 0.0
        r_eff, beta = timing_network(r3, rv, design.wiper, design.control, r4)
        r3, c1 = float(r_eff), c1 / float(beta)
        # The integrator's error voltage works against β·V, so in the equivalent (V, C1/β)
        # it is Ve/β: scale the integrator's offset and bias current by 1/β.
        opamp = dataclasses.replace(
            opamp, offset_v=opamp.offset_v / float(beta), bias_a=opamp.bias_a / float(beta)
        )
    return Oscillator(
        r1=value_at(r1.value_ohm, r1.tempco_ppm, temp_c),
        r2=value_at(r2.value_ohm, r2.tempco_ppm, temp_c),
        r3=r3,
        c1=c1,
        opamp=opamp,
        rails=rails,
    )
