"""The op-amp Schmitt loop in the time domain: its parameters flattened from an ``Oscillator``
into the generic ``timeloop.Loop`` (``loop_from``) that the event-driven simulation
(``tristock.simulate``) integrates between events. All voltages to ground."""

from __future__ import annotations

import math

from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.timeloop import Loop


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
