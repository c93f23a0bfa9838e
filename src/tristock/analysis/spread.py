"""The spread box of one design: its variables and the vectorised model over them.

Every figure comes from the vectorised closed-form model ``physics.predict``; this
module only decides which part values, rails, temperatures and op-amp parameters to feed it.
``worstcase`` searches the box for extremes, ``analysis`` samples it (Monte Carlo).

The spread variables (each a normalised deviation z in [-1, 1]; a variable whose spread is
zero is left out):

- ``R1``, ``R2``, ``R3``, ``C1``: value·(1 + tol·z), tol = tolerance_pct/100.
- ``C1.temp`` (class II capacitors only): value·(1 + band·z), band = temp_band_pct/100. The
  catalog gives only the band, not the curve, so any value in the band is taken as possible at
  any temperature of the range (conservative).
- ``V+``, ``V-``: each rail·(1 + tol·z), tol = supply.tolerance_pct/100, independently (unequal
  rails give unequal swing, which moves duty and frequency). A single supply's V- is 0 V and
  has no spread; its reference follows mid-rail unless the spec fixes it.
- ``T``: temperature from temp_min_c (z = -1) to temp_max_c (z = +1); every value moves as
  value·(1 + tc·(T - 25 °C)) with tc in ppm/°C. Temperature is one shared variable, so R1 and
  R2 move together: with equal tempcos their ratio k = R1/R2, and with it the ideal amplitude
  (VH + VL)·k, does not move with temperature at all (tracking is credited without a special
  case). Op-amp parameters are taken as independent of temperature.
- ``U1.offset.integrator`` (Vos1), ``U1.offset.comparator`` (Vos2): typ·z, bounded by ± the
  catalogued typical offset (:data:`OFFSET_BOUND` times it).
- ``U1.bias``: typ·(1 + z), from 0 to 2x the catalogued bias current (both channels alike,
  sign as catalogued).
- ``U1.slew``: SR·(1 + 0.2·z) (:data:`SLEW_SPREAD`), rise and fall alike.
- ``U1.delay``: td·(1 + 0.3·z) (:data:`DELAY_SPREAD`).

Swing headroom and gain-bandwidth are held at their catalogued values. The centre of the box
has the offsets at 0 V, which is what "± typical" means.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.opamp_schmitt.point import (
    POINT_FIELDS,
    SpreadPoint,
    predict_point,
    square_levels_of,
    swing_imbalance,
)
from tristock.circuits.rails import Rails
from tristock.circuits.topology import Prediction, Topology
from tristock.spec.model import Spec
from tristock.stock.units import format_value

FloatArray = npt.NDArray[np.float64]
#: A float, or an array of floats once deviations are applied.
Value = float | FloatArray

#: Comparator slew-rate spread, ± fraction of the catalogued value.
SLEW_SPREAD = 0.20
#: Comparator propagation-delay spread, ± fraction of the catalogued value.
DELAY_SPREAD = 0.30
#: Input offset bound, in multiples of the catalogued typical offset (± that many).
OFFSET_BOUND = 1.0
#: Bias-current spread, ± fraction of the catalogued value (1.0: from 0 to 2x).
BIAS_SPREAD = 1.0
#: The metrics of ``evaluate``, in column order.
METRICS = ("frequency_hz", "amplitude_vpp", "duty_high")


@dataclass(frozen=True)
class Board:
    """A point plus how the reference node follows the rails and how a pot is wired."""

    point: SpreadPoint
    v_ref: float | None
    control: str = "series"
    topology: Topology = OPAMP_SCHMITT

    @classmethod
    def of(cls, design: Design, rails: Rails, temp_c: float) -> Board:
        """The design's values at ``temp_c`` (its topology's ``board_point``)."""
        point = design.topology.board_point(design, rails, temp_c)
        return cls(point, rails.v_ref, design.control, design.topology)

    def predict(self, point: SpreadPoint) -> Prediction:
        """The topology's vectorised model at ``point`` (this board's reference and wiring)."""
        return self.topology.predict(point, self.v_ref, self.control)


def metric_table(pred: Prediction, rows: int) -> FloatArray:
    """(rows, 3) array of frequency (Hz), amplitude (Vpp), duty_high (``METRICS``)."""
    cols = [np.broadcast_to(np.asarray(getattr(pred, m), dtype=float), (rows,)) for m in METRICS]
    return np.stack(cols, axis=1)


#: A point's fields by name while spread variables are applied (one SpreadPoint is built after).
PointValues = dict[str, Any]


@dataclass(frozen=True)
class SpreadVariable:
    """One spread variable: how a deviation z in [-1, 1] moves the point, and its text."""

    name: str
    apply: Callable[[PointValues, FloatArray], None]  # moves the named fields in place
    describe: Callable[[float], str]
    temperature: bool = False
    rail: bool = False


def _pct(x: float) -> str:
    return f"{x * 100:+.3g} %"


def _signed(value: float, unit: str) -> str:
    text = format_value(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


def _scaled(fields: tuple[str, ...], spread: float) -> Callable[[PointValues, FloatArray], None]:
    """z -> every field x·(1 + spread·z)."""

    def apply(p: PointValues, z: FloatArray) -> None:
        factor = 1.0 + spread * z
        for f in fields:
            p[f] = p[f] * factor

    return apply


def _added(fields: tuple[str, ...], bound: float) -> Callable[[PointValues, FloatArray], None]:
    """z -> every field x + bound·z."""

    def apply(p: PointValues, z: FloatArray) -> None:
        for f in fields:
            p[f] = p[f] + bound * z

    return apply


def _tolerance_variable(
    name: str, field: str, value: float, tol: float, unit: str, *, rail: bool = False
) -> SpreadVariable:
    return SpreadVariable(
        name,
        _scaled((field,), tol),
        lambda z: f"{format_value(value * (1 + tol * z), unit)} ({_pct(tol * z)})",
        rail=rail,
    )


def _temperature_variable(design: Design, t_min: float, t_max: float) -> SpreadVariable:
    mid, half = (t_min + t_max) / 2.0, (t_max - t_min) / 2.0
    cap = design.timing_capacitor
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    tempcos = {
        "r1": design.r1.tempco_ppm,
        "r2": design.r2.tempco_ppm,
        "r3": design.r3.tempco_ppm,
        "c1": c_tc,
        "rv": design.rv1.tempco_ppm if design.rv1 else 0.0,
        "r4": design.r4.tempco_ppm if design.r4 else 0.0,
    }

    def apply(p: PointValues, z: FloatArray) -> None:
        dt = mid + half * z - 25.0
        for f, tc in tempcos.items():
            p[f] = p[f] * (1.0 + tc * 1e-6 * dt)

    return SpreadVariable("T", apply, lambda z: f"{mid + half * z:.4g} °C", temperature=True)


def _part_variables(design: Design) -> list[SpreadVariable]:
    """Tolerances of R1, R2, R3, the selected capacitor, RV1 and R4; a class II band."""
    cap = design.timing_capacitor
    cap_name = f"C{design.selected + 1}"
    spread_parts = [
        ("R1", "r1", design.r1.value_ohm, design.r1.tolerance_pct, "Ω"),
        ("R2", "r2", design.r2.value_ohm, design.r2.tolerance_pct, "Ω"),
        ("R3", "r3", design.r3.value_ohm, design.r3.tolerance_pct, "Ω"),
        (cap_name, "c1", cap.value_f, cap.tolerance_pct, "F"),
    ]
    if design.rv1 is not None:
        spread_parts.append(("RV1", "rv", design.rv1.value_ohm, design.rv1.tolerance_pct, "Ω"))
    if design.r4 is not None:
        spread_parts.append(("R4", "r4", design.r4.value_ohm, design.r4.tolerance_pct, "Ω"))
    variables = [
        _tolerance_variable(name, field, part_value, tol_pct / 100, unit)
        for name, field, part_value, tol_pct, unit in spread_parts
        if tol_pct > 0
    ]
    band_pct = cap.temp_band_pct
    if cap.is_class_ii and band_pct is not None and band_pct > 0:
        band = band_pct / 100
        variables.append(
            SpreadVariable(f"{cap_name}.temp", _scaled(("c1",), band), lambda z: _pct(band * z))
        )
    return variables


def _opamp_variables(design: Design) -> list[SpreadVariable]:
    """Offsets, bias, slew and delay of U1 (see the module docstring)."""
    u1 = design.u1
    variables: list[SpreadVariable] = []
    vos = abs(u1.offset_v) * OFFSET_BOUND
    if vos > 0:
        for label, field in (("integrator", "vos1"), ("comparator", "vos2")):
            variables.append(
                SpreadVariable(
                    f"U1.offset.{label}", _added((field,), vos), lambda z: _signed(vos * z, "V")
                )
            )
    ib = u1.bias_a
    if ib != 0:
        variables.append(
            SpreadVariable(
                "U1.bias",
                _scaled(("ib1", "ib2"), BIAS_SPREAD),
                lambda z: format_value(ib * (1 + BIAS_SPREAD * z), "A"),
            )
        )
    sr = u1.slew_v_per_us
    if math.isfinite(sr) and sr > 0:
        variables.append(
            SpreadVariable(
                "U1.slew",
                _scaled(("slew_rise", "slew_fall"), SLEW_SPREAD),
                lambda z: f"{sr * (1 + SLEW_SPREAD * z):.4g} V/µs ({_pct(SLEW_SPREAD * z)})",
            )
        )
    td = u1.delay_s
    if td > 0:
        variables.append(
            SpreadVariable(
                "U1.delay",
                _scaled(("delay",), DELAY_SPREAD),
                lambda z: (
                    f"{format_value(td * (1 + DELAY_SPREAD * z), 's')} ({_pct(DELAY_SPREAD * z)})"
                ),
            )
        )
    return variables


def spread_board(design: Design, spec: Spec) -> tuple[Board, list[SpreadVariable]]:
    """The centre of the spread (offsets 0 V, bias as catalogued) and its variables, in the
    order parts, class II band, V+, V-, T, op amp."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    u1 = design.u1
    board = Board.of(design, rails, 25.0 if ranged else env.temp_min_c)
    board = replace(
        board, point=replace(board.point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u1.bias_a)
    )
    variables = _part_variables(design)
    tol_v = spec.supply.tolerance_pct / 100
    if tol_v > 0:
        for name, field, v in (("V+", "v_pos", rails.v_pos), ("V-", "v_neg", rails.v_neg)):
            if v != 0:
                variables.append(_tolerance_variable(name, field, v, tol_v, "V", rail=True))
    if ranged:
        variables.append(_temperature_variable(design, env.temp_min_c, env.temp_max_c))
    variables.extend(_opamp_variables(design))
    return board, variables


def point_at(board: Board, variables: list[SpreadVariable], z: FloatArray) -> SpreadPoint:
    """The point at the deviations ``z`` (rows, n): array fields of ``rows`` entries."""
    values: PointValues = {f: getattr(board.point, f) for f in POINT_FIELDS}
    for i, var in enumerate(variables):
        var.apply(values, z[:, i])
    return SpreadPoint(**values)


def evaluate(board: Board, variables: list[SpreadVariable], z: FloatArray) -> FloatArray:
    """Metrics (rows, 3) at the deviations ``z`` (rows, n), columns as ``METRICS``."""
    pred = board.predict(point_at(board, variables, z))
    return metric_table(pred, z.shape[0])


def check_inputs(design: object, spec: object) -> None:
    """TypeError naming the argument unless ``design`` is a Design and ``spec`` a Spec."""
    if not isinstance(design, Design):
        raise TypeError(
            f"design: expected a tristock.circuits.board.Design, got {type(design).__name__}"
        )
    if not isinstance(spec, Spec):
        raise TypeError(f"spec: expected a tristock.spec.model.Spec, got {type(spec).__name__}")


__all__ = [
    "BIAS_SPREAD",
    "DELAY_SPREAD",
    "METRICS",
    "OFFSET_BOUND",
    "POINT_FIELDS",
    "SLEW_SPREAD",
    "Board",
    "SpreadPoint",
    "SpreadVariable",
    "check_inputs",
    "evaluate",
    "metric_table",
    "point_at",
    "predict_point",
    "spread_board",
    "square_levels_of",
    "swing_imbalance",
]
