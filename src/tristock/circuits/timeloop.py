"""The loop in the time domain: the parameters every topology's ``time_domain`` hands to the
event-driven simulation (``tristock.simulate``), with the rates and the comparator's decision
it integrates between events. All voltages to ground.

Today's loop is an integrator (R3, C1, its error voltage Vos1 + Ib1·R3) driven by the square,
and a comparator deciding on a resistive divider (R1 from the triangle, R2 from the square)
whose output swings between two levels at finite slew after a transport delay; a topology with
other levels, other rates or another decision (a clamp, a comparator IC, one resistor per
direction) extends it here, so the simulation stays generic.
"""

from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Loop:
    """The loop's parameters, flattened; all voltages to ground."""

    r1: float
    r2: float
    r3: float
    c1: float
    v_ref: float
    v_high: float  # VOH, also the integrator's upper output limit
    v_low: float  # VOL, also the integrator's lower output limit
    slew_rise: float
    slew_fall: float
    delay: float
    vos1: float
    ib1: float
    vos2: float
    ib2: float
    gbw_hz: float = math.inf  # both channels; finite: the ODE path

    @property
    def v_mid(self) -> float:
        return 0.5 * (self.v_high + self.v_low)

    @property
    def tolerance_v(self) -> float:
        """Voltage below which two levels count as equal (rounding only)."""
        return 1e-12 * max(1.0, abs(self.v_high), abs(self.v_low), self.v_high - self.v_low)

    def rate(self, vs: float) -> float:
        """Free-running integrator output rate (V/s) with the square at ``vs``."""
        return (self.v_ref + self.vos1 - vs) / (self.r3 * self.c1) + self.ib1 / self.c1

    def comparator_terms(self) -> tuple[float, float, float]:
        """(a, b, c) with g = a·vt + b·vs + c, the comparator's decision voltage (V)."""
        total = self.r1 + self.r2
        drop = self.ib2 * self.r1 * self.r2 / total
        return self.r2 / total, self.r1 / total, -drop - self.v_ref - self.vos2

    def time_scale_s(self) -> float:
        """A generous scale (s) for one period, to bound how long a run may go: the ideal-switch
        period from the trip levels plus four edges' delay, slew and 100/ωt of build-up."""
        span = self.v_high - self.v_low
        hysteresis = self.trip_level(self.v_low) - self.trip_level(self.v_high)
        slowest = min(abs(self.rate(self.v_high)), abs(self.rate(self.v_low)))
        edge = self.delay + span / min(self.slew_rise, self.slew_fall)
        edge += 100.0 / (2.0 * math.pi * self.gbw_hz)
        return 2.0 * abs(hysteresis) / max(slowest, 1e-300) + 4.0 * edge

    def trip_level(self, vs: float) -> float:
        """Triangle voltage (to ground) at which the comparator flips with the square at ``vs``."""
        a, b, c = self.comparator_terms()
        return -(b * vs + c) / a
