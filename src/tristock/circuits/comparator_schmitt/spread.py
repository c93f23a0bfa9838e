"""The spread box of a comparator-IC board on a spec: its centre and its variables
(``circuits.spreadvars``), each moving fields of ``point.ComparatorPoint``.

The variables (a variable whose spread is zero is left out), in this order:

- ``R1``, ``R2``, ``R3``, ``C1``, ``R5`` (open-drain U2 only): value·(1 + tol·z), tol =
  tolerance_pct/100; ``C1.temp`` for a class II C1 (its band, as in ``opamp_schmitt.spread``).
- ``V+``, ``V-``: each rail·(1 + tol·z) (a single supply's 0 V rail has none).
- ``T``: temperature over the spec's range; the resistors and C1 by their tempcos (ppm/°C),
  exactly what ``point.oscillator_of`` does at that temperature. U1's and U2's figures are
  taken as independent of temperature.
- ``U1.offset`` (Vos1), ``U1.bias`` (Ib1): U1 is the integrator only; the bounds of
  ``opamp_schmitt.spread`` (± :data:`OFFSET_BOUND` times the typical offset, bias from 0 to
  2x).
- ``U2.delay``: td·(1 + 0.3·z) (``opamp_schmitt.spread.DELAY_SPREAD``).
- ``U2.edges``: rise and fall together, ·(1 + 0.3·z) (:data:`EDGE_SPREAD`).
- ``U2.offset`` (Vos2, ± its typical offset), ``U2.bias`` (Ib2, from 0 to 2x).

The centre is the board at 25 °C (at temp_min_c when the range is one temperature) with both
offsets at 0 V and both bias currents as catalogued.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from types import MappingProxyType

import numpy as np

from tristock.circuits.comparator_schmitt.physics import high_level
from tristock.circuits.comparator_schmitt.point import (
    ComparatorPoint,
    oscillator_of,
    part_of,
    reference_of,
)
from tristock.circuits.opamp_schmitt.spread import BIAS_SPREAD, DELAY_SPREAD, OFFSET_BOUND
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.spreadvars import (
    SpreadBox,
    SpreadVariable,
    added,
    part_tempcos,
    part_tolerances,
    percent,
    rail_tolerances,
    scaled,
    signed_value,
    temperature,
)
from tristock.circuits.topology import BoardParts, FloatArray
from tristock.spec.model import Spec
from tristock.stock.comparators import Comparator
from tristock.stock.parts import Capacitor, OpAmp, Resistor
from tristock.stock.units import format_value

#: A comparator's rise and fall time spread, ± fraction of the catalogued values (common
#: practice, as its delay's).
EDGE_SPREAD = 0.30

#: Sensitivity name -> the fields of ``ComparatorPoint`` it scales (``analysis.sensitivity``).
SENSITIVITY_FIELDS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "R1": ("r1",),
        "R2": ("r2",),
        "R3": ("r3",),
        "C1": ("c1",),
        "V+": ("v_pos",),
        "V-": ("v_neg",),
        "U1.gbw": ("gbw",),
        "U1.offset": ("vos1",),
        "U1.bias": ("ib1",),
        "U2.delay": ("delay",),
        "U2.edges": ("rise", "fall"),
        "U2.offset": ("vos2",),
        "U2.bias": ("ib2",),
    }
)


def offset_and_bias(
    name: str, offset_field: str, bias_field: str, offset_v: float, bias_a: float
) -> list[SpreadVariable]:
    """``<name>.offset`` (± OFFSET_BOUND times |offset_v|) and ``<name>.bias`` (bias·(1 +
    BIAS_SPREAD·z)), each left out at 0."""
    variables: list[SpreadVariable] = []
    vos = abs(offset_v) * OFFSET_BOUND
    if vos > 0:
        variables.append(
            added(f"{name}.offset", (offset_field,), vos, lambda z: signed_value(vos * z, "V"))
        )
    if bias_a != 0:
        variables.append(
            scaled(
                f"{name}.bias",
                (bias_field,),
                BIAS_SPREAD,
                lambda z: format_value(bias_a * (1 + BIAS_SPREAD * z), "A"),
            )
        )
    return variables


def comparator_variables(u2: Comparator) -> list[SpreadVariable]:
    """U2's delay and edges (each left out at 0), then its offset and bias."""
    variables: list[SpreadVariable] = []
    td = u2.delay_s
    if td > 0:
        variables.append(
            scaled(
                "U2.delay",
                ("delay",),
                DELAY_SPREAD,
                lambda z: (
                    f"{format_value(td * (1 + DELAY_SPREAD * z), 's')} "
                    f"({percent(DELAY_SPREAD * z)})"
                ),
            )
        )
    if u2.rise_s > 0 or u2.fall_s > 0:
        variables.append(
            scaled(
                "U2.edges",
                ("rise", "fall"),
                EDGE_SPREAD,
                lambda z: f"rise and fall {percent(EDGE_SPREAD * z)}",
            )
        )
    return variables + offset_and_bias("U2", "vos2", "ib2", u2.offset_v, u2.bias_a)


def spread_box(design: BoardParts, spec: Spec) -> SpreadBox:
    """The centre (offsets 0 V, bias as catalogued) and the variables in the order of the
    module docstring."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    parts = design.parts()
    u1, u2 = part_of(parts, "U1", OpAmp), part_of(parts, "U2", Comparator)
    point = oscillator_of(design, rails, 25.0 if ranged else env.temp_min_c).point
    centre = dataclasses.replace(point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u2.bias_a)
    valued: dict[str, tuple[str, Resistor | Capacitor]] = {
        d: (d.lower(), part_of(parts, d, Resistor)) for d in ("R1", "R2", "R3")
    }
    valued["C1"] = ("c1", part_of(parts, "C1", Capacitor))
    if u2.is_open_drain and "R5" in parts:
        valued["R5"] = ("r5", part_of(parts, "R5", Resistor))
    variables = part_tolerances(valued)
    variables += rail_tolerances(spec, rails)
    if ranged:
        variables.append(temperature(env.temp_min_c, env.temp_max_c, part_tempcos(valued)))
    variables += offset_and_bias("U1", "vos1", "ib1", u1.offset_v, u1.bias_a)
    variables += comparator_variables(u2)
    return SpreadBox(centre, tuple(variables))


def drive_imbalance(point: ComparatorPoint, v_ref: float | None) -> FloatArray:
    """(vs0 - Ve) - (L + Ve) in volts, the integrator's drive with the square high (at the
    triangle's mid level, vt = 0) less its drive with the square low: vs0 the high level
    (``physics.high_level``: Hs = V+ - headroom - ref, loaded through R5 on an open-drain
    U2), L = ref - (V- + VOL), Ve = Vos1 + Ib1·R3. Affine in each rail while the reference is
    fixed, 0 V or mid-rail (vs0 is affine in Hs)."""
    ref = reference_of(point.v_pos, point.v_neg, v_ref)
    hs = np.asarray(point.v_pos, dtype=float) - point.headroom - ref
    vs0, _ = high_level(point.r1, point.r2, point.r3, hs, point.r5, point.vos1)
    low = ref - (np.asarray(point.v_neg, dtype=float) + point.vol)
    ve = np.asarray(point.vos1, dtype=float) + np.asarray(point.ib1, dtype=float) * point.r3
    return np.asarray(vs0 - low - 2.0 * ve, dtype=float)
