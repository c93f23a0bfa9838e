"""The op-amp Schmitt loop in the time domain: its parameters flattened from an ``Oscillator``
(``loop_from``), with the rates and the comparator's decision the event-driven simulation
(``tristock.simulate``) integrates between events. All voltages to ground."""

from __future__ import annotations

import math
from dataclasses import dataclass

from tristock.circuits.opamp_schmitt.physics import Oscillator


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


def _check_positive(name: str, value: float, *, allow_inf: bool = False) -> float:
    v = float(value)
    if math.isnan(v) or v <= 0 or (math.isinf(v) and not allow_inf):
        kind = "a positive number" if allow_inf else "a positive finite number"
        raise ValueError(f"{name}: {value!r} must be {kind}")
    return v


def _check_finite(name: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{name}: {value!r} must be a finite number")
    return v


def loop_from(osc: Oscillator) -> Loop:
    amp = osc.opamp
    rails = osc.rails
    v_ref = _check_finite("rails.reference_v", rails.reference_v)
    v_high = _check_finite("rails.v_pos", rails.v_pos) - _check_finite(
        "opamp.swing_pos_v", amp.swing_pos_v
    )
    v_low = _check_finite("rails.v_neg", rails.v_neg) + _check_finite(
        "opamp.swing_neg_v", amp.swing_neg_v
    )
    if not v_high > v_low:
        raise ValueError(
            f"opamp.swing_pos_v/swing_neg_v: output range {v_low:g} V to {v_high:g} V is empty "
            f"on rails {rails.v_neg:g} V / {rails.v_pos:g} V"
        )
    delay = _check_finite("opamp.delay_s", amp.delay_s)
    if delay < 0:
        raise ValueError(f"opamp.delay_s: {amp.delay_s!r} must not be negative")
    return Loop(
        r1=_check_positive("r1", osc.r1),
        r2=_check_positive("r2", osc.r2),
        r3=_check_positive("r3", osc.r3),
        c1=_check_positive("c1", osc.c1),
        v_ref=v_ref,
        v_high=v_high,
        v_low=v_low,
        slew_rise=_check_positive("opamp.slew_rise_v_per_s", amp.slew_rise_v_per_s, allow_inf=True),
        slew_fall=_check_positive("opamp.slew_fall_v_per_s", amp.slew_fall_v_per_s, allow_inf=True),
        delay=delay,
        vos1=_check_finite("opamp.offset_v", amp.offset_v),
        ib1=_check_finite("opamp.bias_a", amp.bias_a),
        vos2=_check_finite("opamp.comparator_offset_v", amp.comparator_offset_v),
        ib2=_check_finite("opamp.comparator_bias_a", amp.comparator_bias_a),
        gbw_hz=_check_positive("opamp.gbw_hz", amp.gbw_hz, allow_inf=True),
    )
