"""What a time-domain simulation returns: the measured values and the sampled waveforms."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np


class SimulationError(RuntimeError):
    """The loop does not oscillate (or does not settle) in the time-domain model."""


@dataclass(frozen=True, slots=True)
class Measured:
    """What the simulation measured over the measured window.

    Voltages are relative to the reference node (like ``circuit.Prediction``), signed:
    ``peak_low_v`` and ``square_low_v`` are negative for a loop centred on its reference.
    ``duty_high`` is the fraction of the period the square spends at or above its mid-swing
    level (VOH + VOL)/2; ``amplitude_vpp`` is the triangle's true peak-to-peak, overshoot
    included; ``offset_v`` the triangle midpoint (peak_high + peak_low)/2.
    """

    frequency_hz: float
    amplitude_vpp: float
    duty_high: float
    offset_v: float
    peak_high_v: float
    peak_low_v: float
    square_high_v: float
    square_low_v: float

    @property
    def period_s(self) -> float:
        return 1.0 / self.frequency_hz

    def to_dict(self) -> dict[str, float]:
        return {
            "frequency_hz": self.frequency_hz,
            "period_s": self.period_s,
            "amplitude_vpp": self.amplitude_vpp,
            "duty_high": self.duty_high,
            "offset_v": self.offset_v,
            "peak_high_v": self.peak_high_v,
            "peak_low_v": self.peak_low_v,
            "square_high_v": self.square_high_v,
            "square_low_v": self.square_low_v,
        }


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """A finished simulation.

    ``t_s`` is time from the start of the measured window (s), non-decreasing; a time appears
    twice where the square steps (infinite slew), once with each value. ``triangle_v`` and
    ``square_v`` are node voltages to ground (V), exact samples of the piecewise solution, with
    every corner of the waveform included while ``max_points`` allows. ``threshold_high_v`` and
    ``threshold_low_v`` are the triangle levels at which the comparator flips with the square
    settled low and high respectively, relative to the reference; ``reference_v`` is the
    reference node to ground. ``events`` counts the simulation's events, start-up included.
    """

    measured: Measured
    t_s: np.ndarray
    triangle_v: np.ndarray
    square_v: np.ndarray
    periods_measured: int
    reference_v: float
    threshold_high_v: float
    threshold_low_v: float
    settle_time_s: float
    events: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: floats, ints and lists of floats only."""
        return {
            "measured": self.measured.to_dict(),
            "periods_measured": self.periods_measured,
            "reference_v": self.reference_v,
            "threshold_high_v": self.threshold_high_v,
            "threshold_low_v": self.threshold_low_v,
            "settle_time_s": self.settle_time_s,
            "events": self.events,
            "t_s": self.t_s.tolist(),
            "triangle_v": self.triangle_v.tolist(),
            "square_v": self.square_v.tolist(),
        }
