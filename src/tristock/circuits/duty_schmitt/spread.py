"""The spread box of a set-duty board on a spec: its centre and its variables
(``circuits.spreadvars``), each moving fields of ``physics.DutyPoint``.

The variables (a variable whose spread is zero is left out), in this order:

- ``R1``, ``R2``, ``R3A``, ``R3B``, ``C1``: value·(1 + tol·z), tol = tolerance_pct/100;
  ``C1.temp`` for a class II C1 (its band, as in ``opamp_schmitt.spread``).
- ``D3``, ``D4``: the forward drop vf·(1 + tol·z), tol = the diode's tolerance_pct/100 (a
  signal diode's tolerance is of vf_v).
- ``V+``, ``V-``: each rail·(1 + tol·z).
- ``T``: temperature over the spec's range; R1, R2, R3A, R3B and C1 by their tempcos
  (ppm/°C), each forward drop by its tempco_mv_per_c and the thermal voltage by k/q (V/°C):
  exactly what ``board_point`` does at that temperature (``circuits.diode.diode_at``).
- ``U1.offset.integrator``, ``U1.offset.comparator``, ``U1.bias``, ``U1.slew``, ``U1.delay``:
  as in ``opamp_schmitt.spread`` (``opamp_variables``).

The centre is the board at 25 °C (at temp_min_c when the range is one temperature) with the
op amp's offsets at 0 V and its bias currents as catalogued.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from types import MappingProxyType

import numpy as np

from tristock.circuits.clamped_schmitt.board import part_at
from tristock.circuits.diode import K_OVER_Q
from tristock.circuits.duty_schmitt.board import board_point
from tristock.circuits.duty_schmitt.physics import DutyPoint, square_levels_of
from tristock.circuits.opamp_schmitt.spread import opamp_variables
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.spreadvars import (
    SpreadBox,
    ValuedParts,
    part_tempcos,
    part_tolerances,
    rail_tolerances,
    temperature,
    tolerance,
)
from tristock.circuits.topology import BoardParts, FloatArray
from tristock.spec.model import Spec
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Resistor

#: Sensitivity name -> the fields of ``DutyPoint`` it scales (``analysis.sensitivity``).
SENSITIVITY_FIELDS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "R1": ("r1",),
        "R2": ("r2",),
        "R3A": ("r3a",),
        "R3B": ("r3b",),
        "C1": ("c1",),
        "D3": ("vf3",),
        "D4": ("vf4",),
        "V+": ("v_pos",),
        "V-": ("v_neg",),
        "U1.slew": ("slew_rise", "slew_fall"),
        "U1.delay": ("delay",),
        "U1.gbw": ("gbw",),
        "U1.offset": ("vos1", "vos2"),
        "U1.bias": ("ib1", "ib2"),
    }
)


def valued_parts(design: BoardParts) -> ValuedParts:
    """Designator -> (point field, part) of R1, R2, R3A, R3B and C1."""
    parts = design.parts()
    out: dict[str, tuple[str, Resistor | Capacitor]] = {
        d: (d.lower(), part_at(parts, d, Resistor)) for d in ("R1", "R2", "R3A", "R3B")
    }
    out["C1"] = ("c1", part_at(parts, "C1", Capacitor))
    return out


def spread_box(design: BoardParts, spec: Spec) -> SpreadBox:
    """The centre (offsets 0 V, bias as catalogued) and the variables in the order of the
    module docstring."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    parts = design.parts()
    u1 = part_at(parts, "U1", OpAmp)
    diodes = {d: (d[1], part_at(parts, d, Diode)) for d in ("D3", "D4")}
    point = board_point(design, rails, 25.0 if ranged else env.temp_min_c)
    centre = dataclasses.replace(point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u1.bias_a)
    valued = valued_parts(design)
    variables = part_tolerances(valued)
    for name, (n, d) in diodes.items():
        if d.tolerance_pct > 0:
            variables.append(tolerance(name, f"vf{n}", d.vf_v, d.tolerance_pct / 100, "V"))
    variables += rail_tolerances(spec, rails)
    if ranged:
        drifts = {"vt_therm": K_OVER_Q}
        drifts |= {f"vf{n}": d.tempco_mv_per_c * 1e-3 for n, d in diodes.values()}
        variables.append(temperature(env.temp_min_c, env.temp_max_c, part_tempcos(valued), drifts))
    variables += opamp_variables(u1)
    return SpreadBox(centre, tuple(variables))


def drive_imbalance(point: DutyPoint, v_ref: float | None) -> FloatArray:
    """(VH - Vos1 - Vf3) - (VL + Vos1 - Vf4) in volts: the high drive across R3A less the low
    drive across R3B, each diode at its 1 mA drop. Affine in each rail while the reference is
    fixed or 0 V (VH and VL are); zero where the two drives are equal (with R3A = R3B, where
    the ramps are equally steep)."""
    vh, vl = square_levels_of(point, v_ref)
    vos1 = np.asarray(point.vos1, dtype=float)
    return np.asarray(vh - vl - 2.0 * vos1 - point.vf3 + point.vf4, dtype=float)
