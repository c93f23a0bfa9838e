"""The spread box of an op-amp Schmitt board on a spec: its centre and its variables.

The variables (each a normalised deviation z in [-1, 1]; a variable whose spread is zero is
left out), in this order:

- ``R1``, ``R2``, ``R3``, ``C1`` (the selected range capacitor ``Cn`` on a tuned board),
  ``RV1``, ``R4``: value·(1 + tol·z), tol = tolerance_pct/100.
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
has the offsets at 0 V, which is what "± typical" means, the bias currents as catalogued, and
the board at 25 °C (at temp_min_c when the range is a single temperature).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from types import MappingProxyType

from tristock.circuits.opamp_schmitt.point import board_point, part_of
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.spreadvars import (
    SpreadBox,
    SpreadVariable,
    added,
    percent,
    scaled,
    signed_value,
    temperature,
    tolerance,
)
from tristock.circuits.topology import BoardParts
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor
from tristock.stock.units import format_value

#: Comparator slew-rate spread, ± fraction of the catalogued value.
SLEW_SPREAD = 0.20
#: Comparator propagation-delay spread, ± fraction of the catalogued value.
DELAY_SPREAD = 0.30
#: Input offset bound, in multiples of the catalogued typical offset (± that many).
OFFSET_BOUND = 1.0
#: Bias-current spread, ± fraction of the catalogued value (1.0: from 0 to 2x).
BIAS_SPREAD = 1.0

#: Sensitivity name -> the fields of the point it scales (``analysis.sensitivity``).
SENSITIVITY_FIELDS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "R1": ("r1",),
        "R2": ("r2",),
        "R3": ("r3",),
        "C1": ("c1",),
        "V+": ("v_pos",),
        "V-": ("v_neg",),
        "U1.slew": ("slew_rise", "slew_fall"),
        "U1.delay": ("delay",),
        "U1.gbw": ("gbw",),
        "U1.swing_pos": ("swing_pos",),
        "U1.swing_neg": ("swing_neg",),
        "U1.offset": ("vos1", "vos2"),
        "U1.bias": ("ib1", "ib2"),
    }
)


def _timing_parts(design: BoardParts) -> dict[str, tuple[str, Resistor | Capacitor | Pot]]:
    """Designator -> (point field, part) of the timing values: R1, R2, R3, the selected
    capacitor, and RV1 and R4 where the board has them."""
    parts = design.parts()
    out: dict[str, tuple[str, Resistor | Capacitor | Pot]] = {
        "R1": ("r1", part_of(parts, "R1", Resistor)),
        "R2": ("r2", part_of(parts, "R2", Resistor)),
        "R3": ("r3", part_of(parts, "R3", Resistor)),
    }
    cap_name = f"C{design.selected + 1}"
    out[cap_name] = ("c1", part_of(parts, cap_name, Capacitor))
    if "RV1" in parts:
        out["RV1"] = ("rv", part_of(parts, "RV1", Pot))
    if "R4" in parts:
        out["R4"] = ("r4", part_of(parts, "R4", Resistor))
    return out


def _part_variables(design: BoardParts) -> list[SpreadVariable]:
    """Tolerances of R1, R2, R3, the selected capacitor, RV1 and R4; a class II band."""
    variables: list[SpreadVariable] = []
    for name, (field, part) in _timing_parts(design).items():
        value = part.value_f if isinstance(part, Capacitor) else part.value_ohm
        unit = "F" if isinstance(part, Capacitor) else "Ω"
        if part.tolerance_pct > 0:
            variables.append(tolerance(name, field, value, part.tolerance_pct / 100, unit))
    cap_name = f"C{design.selected + 1}"
    cap = part_of(design.parts(), cap_name, Capacitor)
    band_pct = cap.temp_band_pct
    if cap.is_class_ii and band_pct is not None and band_pct > 0:
        band = band_pct / 100
        variables.append(scaled(f"{cap_name}.temp", ("c1",), band, lambda z: percent(band * z)))
    return variables


def _temperature_variable(design: BoardParts, t_min: float, t_max: float) -> SpreadVariable:
    """ "T": every timing value by its tempco (a class II capacitor's is 0: its band is
    ``C1.temp``); the pot's and end stop's fields move (by 0) on boards without them."""
    timing = _timing_parts(design)
    tempcos = {"r1": 0.0, "r2": 0.0, "r3": 0.0, "c1": 0.0, "rv": 0.0, "r4": 0.0}
    for field, part in timing.values():
        tc = part.tempco_ppm
        tempcos[field] = tc if tc is not None else 0.0
    return temperature(t_min, t_max, tempcos)


def opamp_variables(u1: OpAmp) -> list[SpreadVariable]:
    """Offsets, bias, slew and delay of U1 (see the module docstring)."""
    variables: list[SpreadVariable] = []
    vos = abs(u1.offset_v) * OFFSET_BOUND
    if vos > 0:
        for label, field in (("integrator", "vos1"), ("comparator", "vos2")):
            variables.append(
                added(f"U1.offset.{label}", (field,), vos, lambda z: signed_value(vos * z, "V"))
            )
    ib = u1.bias_a
    if ib != 0:
        variables.append(
            scaled(
                "U1.bias",
                ("ib1", "ib2"),
                BIAS_SPREAD,
                lambda z: format_value(ib * (1 + BIAS_SPREAD * z), "A"),
            )
        )
    sr = u1.slew_v_per_us
    if math.isfinite(sr) and sr > 0:
        variables.append(
            scaled(
                "U1.slew",
                ("slew_rise", "slew_fall"),
                SLEW_SPREAD,
                lambda z: f"{sr * (1 + SLEW_SPREAD * z):.4g} V/µs ({percent(SLEW_SPREAD * z)})",
            )
        )
    td = u1.delay_s
    if td > 0:
        variables.append(
            scaled(
                "U1.delay",
                ("delay",),
                DELAY_SPREAD,
                lambda z: (
                    f"{format_value(td * (1 + DELAY_SPREAD * z), 's')} "
                    f"({percent(DELAY_SPREAD * z)})"
                ),
            )
        )
    return variables


def spread_box(design: BoardParts, spec: Spec) -> SpreadBox:
    """The centre of the spread (offsets 0 V, bias as catalogued) and its variables, in the
    order parts, class II band, V+, V-, T, op amp (module docstring)."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    u1 = part_of(design.parts(), "U1", OpAmp)
    point = board_point(design, rails, 25.0 if ranged else env.temp_min_c)
    centre = dataclasses.replace(point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u1.bias_a)
    variables = _part_variables(design)
    tol_v = spec.supply.tolerance_pct / 100
    if tol_v > 0:
        for name, field, v in (("V+", "v_pos", rails.v_pos), ("V-", "v_neg", rails.v_neg)):
            if v != 0:
                variables.append(tolerance(name, field, v, tol_v, "V", rail=True))
    if ranged:
        variables.append(_temperature_variable(design, env.temp_min_c, env.temp_max_c))
    variables.extend(opamp_variables(u1))
    return SpreadBox(centre, tuple(variables))
