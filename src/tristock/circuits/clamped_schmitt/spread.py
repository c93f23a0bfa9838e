"""The spread box of a zener-clamped board on a spec: its centre and its variables
(``circuits.spreadvars``), each moving fields of ``physics.ClampPoint``.

The variables (a variable whose spread is zero is left out), in this order:

- ``R1``, ``R2``, ``R3``, ``R5``, ``C1``: value·(1 + tol·z), tol = tolerance_pct/100;
  ``C1.temp`` for a class II C1 (its band, as in ``opamp_schmitt.spread``).
- ``D1``, ``D2``: the zener voltage vz·(1 + tol·z), tol = the diode's tolerance_pct/100.
- ``D1.rz``, ``D2.rz``: the dynamic resistance rz·(1 + 0.3·z) (:data:`RZ_SPREAD`).
- ``D1.vf``, ``D2.vf``: the forward drop vf + 30 mV·z (:data:`VF_BOUND`).
- ``V+``, ``V-``: each rail·(1 + tol·z) (the op amp's levels; the clamp sets the square's).
- ``T``: temperature over the spec's range; R1, R2, R3, R5 and C1 by their tempcos (ppm/°C),
  each zener's vz by its tempco_mv_per_c, each forward drop by
  ``diode.ZENER_FORWARD_TEMPCO_MV_PER_C`` and the thermal voltage by k/q (V/°C): exactly
  what ``board_point`` does at that temperature (``circuits.diode.diode_at``).
- ``U1.offset.integrator``, ``U1.offset.comparator``, ``U1.bias``, ``U1.slew``, ``U1.delay``:
  as in ``opamp_schmitt.spread`` (``opamp_variables``).

The centre is the board at 25 °C (at temp_min_c when the range is one temperature) with the
op amp's offsets at 0 V and its bias currents as catalogued.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from types import MappingProxyType
from typing import Any

import numpy as np

from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.diode import ZENER_FORWARD_TEMPCO_MV_PER_C
from tristock.circuits.opampvariant import OPAMP_SENSITIVITY, part_at, variant_box
from tristock.circuits.spreadvars import (
    SpreadBox,
    SpreadVariable,
    added,
    scaled,
    signed_value,
    tolerance,
)
from tristock.circuits.topology import BoardParts, FloatArray
from tristock.spec.model import Spec
from tristock.stock.diodes import Diode
from tristock.stock.units import format_value

#: A zener's dynamic-resistance spread, ± fraction of the catalogued rz (common practice).
RZ_SPREAD = 0.30
#: A forward drop's spread at 1 mA, ± V (common practice: ±30 mV for small silicon parts).
VF_BOUND = 0.030

#: Sensitivity name -> the fields of ``ClampPoint`` it scales (``analysis.sensitivity``).
SENSITIVITY_FIELDS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "R1": ("r1",),
        "R2": ("r2",),
        "R3": ("r3",),
        "R5": ("r5",),
        "C1": ("c1",),
        "D1": ("vz1",),
        "D2": ("vz2",),
        "D1.rz": ("rz1",),
        "D2.rz": ("rz2",),
        **OPAMP_SENSITIVITY,
    }
)
#: The resistors whose tolerances and tempcos spread (with C1).
RESISTORS = ("R1", "R2", "R3", "R5")


def ohms_at(rz: float, spread: float) -> Callable[[float], str]:
    """The words of rz·(1 + spread·z) at a deviation z."""
    return lambda z: format_value(rz * (1 + spread * z), "Ω")


def zener_variables(zeners: Mapping[str, tuple[str, Diode]]) -> list[SpreadVariable]:
    """Each zener's voltage tolerance, then each one's rz spread, then each forward-drop
    spread; ``zeners`` maps a designator to (its field suffix, the part)."""
    variables: list[SpreadVariable] = []
    for name, (n, d) in zeners.items():
        vz = d.vz_v if d.vz_v is not None else 0.0
        if d.tolerance_pct > 0 and vz > 0:
            variables.append(tolerance(name, f"vz{n}", vz, d.tolerance_pct / 100, "V"))
    for name, (n, d) in zeners.items():
        rz = d.rz_ohm
        if rz > 0:
            variables.append(
                scaled(
                    f"{name}.rz",
                    (f"rz{n}",),
                    RZ_SPREAD,
                    ohms_at(rz, RZ_SPREAD),
                )
            )
    for name, (n, _) in zeners.items():
        variables.append(
            added(f"{name}.vf", (f"vf{n}",), VF_BOUND, lambda z: signed_value(VF_BOUND * z, "V"))
        )
    return variables


def spread_box(design: BoardParts, spec: Spec) -> SpreadBox:
    """The centre (offsets 0 V, bias as catalogued) and the variables in the order of the
    module docstring (``opampvariant.variant_box``)."""
    parts = design.parts()
    zeners = {d: (d[1], part_at(parts, d, Diode)) for d in ("D1", "D2")}
    drifts: dict[str, float] = {}
    for n, d in zeners.values():
        drifts[f"vz{n}"] = d.tempco_mv_per_c * 1e-3
        drifts[f"vf{n}"] = ZENER_FORWARD_TEMPCO_MV_PER_C * 1e-3
    return variant_box(
        design,
        spec,
        oscillator=ClampedOscillator.of,
        resistors=RESISTORS,
        diode_variables=zener_variables(zeners),
        drifts=drifts,
    )


def drive_imbalance(point: Any, v_ref: float | None) -> FloatArray:
    """Zeros: the clamp, not the rails, sets the square's levels and so the drives (the
    worst case then looks for no balanced-swing point along a rail)."""
    shape = np.broadcast_shapes(np.shape(point.v_pos), np.shape(point.v_neg))
    return np.zeros(shape, dtype=float)
