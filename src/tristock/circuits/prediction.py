"""What a topology's model predicts: the ``Prediction`` every ``predict`` returns."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
#: A float, or an ndarray of floats when ``predict`` was called with arrays.
Value = float | FloatArray
ArrayLike = float | npt.ArrayLike


class Prediction(NamedTuple):
    """What the model predicts; every field a float, or an ndarray when predict broadcast.

    Voltages are relative to the reference node (V); times in s; frequency in Hz.

    - ``duty_high``: fraction of the period the square is above mid-swing (VH - VL)/2.
    - ``amplitude_vpp``: the triangle's true peak-to-peak, overshoot included.
    - ``offset_v``: the triangle's midpoint, (peak_high_v + peak_low_v)/2.
    - ``square_high_v`` = +VH, ``square_low_v`` = -VL (signed levels).
    - ``threshold_high_v``/``threshold_low_v``: where the triangle trips the comparator at
      the top (+VL·k + shift) and the bottom (-VH·k + shift).
    - ``peak_high_v``/``peak_low_v``: the triangle's extremes, thresholds plus overshoot.
    - ``slope_v_per_s``: the steeper ramp, max(a, b)/(R3·C1).
    - ``effective_delay_s``: the one delay d for which T = T0' + (VH + VL)²/(a·b)·d (T0' the
      ideal-switch period with the integrator's slower ramps), i.e. the weighted mean
      (d_rise·b + d_fall·a)/(a + b) of the edges' effective delays (td + τ/2 for a linear
      slew; the finite-GBW build-up and the integrator's lag added).
    - ``timing_share``: the share of the period set by op-amp timing (delay, slew and both
      channels' GBW), 1 - T_ideal/T, with T_ideal the period of the same loop (the same square
      levels, offsets and bias) with instant switching and an ideal integrator.
    """

    frequency_hz: Value
    period_s: Value
    duty_high: Value
    amplitude_vpp: Value
    offset_v: Value
    square_high_v: Value
    square_low_v: Value
    threshold_high_v: Value
    threshold_low_v: Value
    peak_high_v: Value
    peak_low_v: Value
    slope_v_per_s: Value
    effective_delay_s: Value
    timing_share: Value
