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

from collections.abc import Mapping
from types import MappingProxyType

import numpy as np

from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.duty_schmitt.physics import DutyPoint, square_levels_of
from tristock.circuits.opampvariant import OPAMP_SENSITIVITY, part_at, variant_box
from tristock.circuits.spreadvars import SpreadBox, tolerance
from tristock.circuits.topology import BoardParts, FloatArray
from tristock.spec.model import Spec
from tristock.stock.diodes import Diode

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
        **OPAMP_SENSITIVITY,
    }
)
#: The resistors whose tolerances and tempcos spread (with C1).
RESISTORS = ("R1", "R2", "R3A", "R3B")


def spread_box(design: BoardParts, spec: Spec) -> SpreadBox:
    """The centre (offsets 0 V, bias as catalogued) and the variables in the order of the
    module docstring (``opampvariant.variant_box``)."""
    parts = design.parts()
    diodes = {d: (d[1], part_at(parts, d, Diode)) for d in ("D3", "D4")}
    return variant_box(
        design,
        spec,
        oscillator=DutyOscillator.of,
        resistors=RESISTORS,
        diode_variables=[
            tolerance(name, f"vf{n}", d.vf_v, d.tolerance_pct / 100, "V")
            for name, (n, d) in diodes.items()
            if d.tolerance_pct > 0
        ],
        drifts={f"vf{n}": d.tempco_mv_per_c * 1e-3 for n, d in diodes.values()},
    )


def drive_imbalance(point: DutyPoint, v_ref: float | None) -> FloatArray:
    """(VH - Vos1 - Vf3) - (VL + Vos1 - Vf4) in volts: the high drive across R3A less the low
    drive across R3B, each diode at its 1 mA drop. Affine in each rail while the reference is
    fixed or 0 V (VH and VL are); zero where the two drives are equal (with R3A = R3B, where
    the ramps are equally steep)."""
    vh, vl = square_levels_of(point, v_ref)
    vos1 = np.asarray(point.vos1, dtype=float)
    return np.asarray(vh - vl - 2.0 * vos1 - point.vf3 + point.vf4, dtype=float)
