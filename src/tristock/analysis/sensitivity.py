"""Sensitivities (log-space central differences of the model at the nominal point) and
temperature drift (end-point slope over the environment range) of one design."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.analysis.memo import Memo, box_key
from tristock.analysis.spread import Board, check_inputs, metric_table, point_fields
from tristock.circuits.board import AnyBoard
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.topology import BuiltCircuit
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]

#: Relative step of the log-space central differences in ``sensitivities``.
SENSITIVITY_STEP = 1e-4


@dataclass(frozen=True)
class Sensitivity:
    """Normalised sensitivities S = (x/y)·(∂y/∂x) = ∂ln y/∂ln x of y = frequency and y =
    triangle amplitude, keyed by the topology's ``sensitivity_fields`` (the op-amp Schmitt
    loop: "R1", "R2", "R3", "C1", "V+", "V-", "U1.slew", "U1.delay", "U1.gbw",
    "U1.swing_pos", "U1.swing_neg", "U1.offset", "U1.bias")."""

    frequency: dict[str, float]
    amplitude: dict[str, float]

    def to_dict(self) -> dict[str, Any]:
        return {"frequency": dict(self.frequency), "amplitude": dict(self.amplitude)}


def nominal_oscillator(design: AnyBoard, spec: Spec) -> BuiltCircuit:
    """The design at 25 °C on the nominal rails, the op amp as catalogued."""
    return design.oscillator(rails_from_supply(spec.supply), 25.0)


def sensitivities(design: AnyBoard, spec: Spec) -> Sensitivity:
    """Normalised sensitivities at the nominal point (25 °C, nominal rails, op amp as
    catalogued), by central differences in log space:
    S ≈ [ln y(x·e^h) - ln y(x·e^-h)]/(2h), h = SENSITIVITY_STEP.

    Each name scales the point fields the topology lists for it together (the op-amp Schmitt
    loop: "U1.slew" rise and fall slew, "U1.offset" both channels' offsets, "U1.bias" both
    bias currents: they are one part's parameters). A parameter that is zero (offset 0,
    a single supply's V- = 0) has S = x·∂ln y/∂x = 0 exactly and is reported as 0.0; an
    infinite one (slew or GBW = inf) has S = 0 in the limit and comes out as 0.0.
    """
    check_inputs(design, spec)
    board = Board.of(design, rails_from_supply(spec.supply), 25.0)
    fields_of = board.topology.sensitivity_fields
    names = list(fields_of)
    rows = 2 * len(names)
    factors = {f: np.ones(rows) for f in point_fields(board.point)}
    for i, name in enumerate(names):
        for f in fields_of[name]:
            factors[f][2 * i] = math.exp(SENSITIVITY_STEP)
            factors[f][2 * i + 1] = math.exp(-SENSITIVITY_STEP)
    point = dataclasses.replace(
        board.point, **{f: getattr(board.point, f) * factors[f] for f in factors}
    )
    vals = metric_table(board.predict(point), rows)
    with np.errstate(invalid="ignore"):
        logs = np.log(vals[:, :2])
    slopes = (logs[0::2] - logs[1::2]) / (2 * SENSITIVITY_STEP)
    out: list[dict[str, float]] = [{}, {}]
    for i, name in enumerate(names):
        zero = all(getattr(board.point, f) == 0 for f in fields_of[name])
        for j in range(2):
            s = float(slopes[i, j])
            out[j][name] = 0.0 if zero or not math.isfinite(s) else s
    return Sensitivity(frequency=out[0], amplitude=out[1])


# --------------------------------------------------------------------------------------------
# Temperature drift


@dataclass(frozen=True)
class Drift:
    """End-point temperature drift (ppm/°C) of frequency and amplitude between ``temp_low_c``
    and ``temp_high_c``: 1e6·[y(T_high) - y(T_low)]/[y(25 °C)·(T_high - T_low)]."""

    frequency_ppm_per_c: float
    amplitude_ppm_per_c: float
    temp_low_c: float
    temp_high_c: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency_ppm_per_c": self.frequency_ppm_per_c,
            "amplitude_ppm_per_c": self.amplitude_ppm_per_c,
            "temp_low_c": self.temp_low_c,
            "temp_high_c": self.temp_high_c,
        }


def temperature_drift(design: AnyBoard, spec: Spec) -> Drift:
    """Frequency and amplitude drift over the environment range (end-point slope; a range
    that is a single point T0 uses T0 ± 1 °C), at nominal rails with the op amp as catalogued.

    Values move by their tempcos (``Design.oscillator``); R1 and R2 share the temperature, so
    with equal tempcos k = R1/R2 is constant and they add no amplitude drift. A class II
    capacitor has no linear tempco and adds nothing here (its band is in the worst case).
    Remembered per board, supply and environment (``DRIFTS``).
    """
    check_inputs(design, spec)
    key = box_key(design, spec)
    found = DRIFTS.get(key)
    if found is None:
        found = _drift(design, spec)
        DRIFTS.put(key, found)
    return found


#: The drifts of boards met before in this process (``analysis.memo``).
DRIFTS: Memo[Drift] = Memo(max_items=4096, max_bytes=1 << 30)


def _drift(design: AnyBoard, spec: Spec) -> Drift:
    env = spec.environment
    lo, hi = env.temp_min_c, env.temp_max_c
    if hi == lo:
        lo, hi = lo - 1.0, hi + 1.0
    rails = rails_from_supply(spec.supply)
    ref = design.oscillator(rails, 25.0).prediction()
    p_lo = design.oscillator(rails, lo).prediction()
    p_hi = design.oscillator(rails, hi).prediction()

    def slope(y_lo: float, y_hi: float, y_ref: float) -> float:
        return 1e6 * (y_hi - y_lo) / (y_ref * (hi - lo))

    return Drift(
        frequency_ppm_per_c=slope(
            float(p_lo.frequency_hz), float(p_hi.frequency_hz), float(ref.frequency_hz)
        ),
        amplitude_ppm_per_c=slope(
            float(p_lo.amplitude_vpp), float(p_hi.amplitude_vpp), float(ref.amplitude_vpp)
        ),
        temp_low_c=lo,
        temp_high_c=hi,
    )
