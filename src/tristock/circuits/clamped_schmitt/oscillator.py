"""One built zener-clamped oscillator: its values at a temperature, the op amp, the rails and
the two zeners; ``prediction()`` runs ``physics.predict_point`` and ``str`` prints it."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

from tristock.circuits.clamped_schmitt.physics import ClampPoint, predict_point
from tristock.circuits.diode import diode_at, thermal_voltage
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.circuits.topology import Prediction
from tristock.stock.diodes import Diode
from tristock.stock.units import format_value


def _fmt(value: float, unit: str) -> str:
    return format_value(value, unit, digits=3)


def _signed(value: float, unit: str) -> str:
    text = _fmt(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


@dataclass(frozen=True)
class ClampedOscillator:
    """R1, R2, R3, R5 (Ω) and C1 (F) at ``temp_c`` (°C); U1 (both channels alike); D1 (its
    breakdown clamps the square high) and D2 (low), catalogued zeners moved to ``temp_c``."""

    r1: float
    r2: float
    r3: float
    r5: float
    c1: float
    opamp: OpAmpModel
    rails: Rails
    d1: Diode
    d2: Diode
    temp_c: float = 25.0

    def __post_init__(self) -> None:
        for name in ("r1", "r2", "r3", "r5", "c1"):
            v = getattr(self, name)
            if not (math.isfinite(v) and v > 0.0):
                raise ValueError(f"{name}: must be a positive finite value, got {v!r}")
        for name in ("d1", "d2"):
            if not getattr(self, name).is_zener:
                raise ValueError(f"{name}: {getattr(self, name).id} is not a zener")
        square_levels(self.rails, self.opamp)

    def point(self) -> ClampPoint:
        """The model's inputs (``physics.ClampPoint``)."""
        m = self.opamp
        vz1, rz1, izt1, vf1 = diode_at(self.d1, self.temp_c)
        vz2, rz2, izt2, vf2 = diode_at(self.d2, self.temp_c)
        return ClampPoint(
            r1=self.r1,
            r2=self.r2,
            r3=self.r3,
            r5=self.r5,
            c1=self.c1,
            v_pos=self.rails.v_pos,
            v_neg=self.rails.v_neg,
            swing_pos=m.swing_pos_v,
            swing_neg=m.swing_neg_v,
            slew_rise=m.slew_rise_v_per_s,
            slew_fall=m.slew_fall_v_per_s,
            delay=m.delay_s,
            gbw=m.gbw_hz,
            vos1=m.offset_v,
            ib1=m.bias_a,
            vos2=m.comparator_offset_v,
            ib2=m.comparator_bias_a,
            vz1=vz1,
            rz1=rz1,
            izt1=izt1,
            vf1=vf1,
            vz2=vz2,
            rz2=rz2,
            izt2=izt2,
            vf2=vf2,
            vt_therm=float(thermal_voltage(self.temp_c)),
        )

    def prediction(self) -> Prediction:
        return self._prediction

    @cached_property
    def _prediction(self) -> Prediction:
        return predict_point(self.point(), self.rails.v_ref)

    @property
    def frequency_hz(self) -> float:
        return float(self.prediction().frequency_hz)

    @property
    def period_s(self) -> float:
        return float(self.prediction().period_s)

    @property
    def amplitude_vpp(self) -> float:
        return float(self.prediction().amplitude_vpp)

    @property
    def duty_high(self) -> float:
        return float(self.prediction().duty_high)

    def __str__(self) -> str:
        p = self.prediction()
        r = self.rails
        vh, vl = square_levels(r, self.opamp)
        return "\n".join(
            [
                "zener-clamped triangle/square oscillator",
                f"  R1 {_fmt(self.r1, 'Ω')}   R2 {_fmt(self.r2, 'Ω')}   R3 {_fmt(self.r3, 'Ω')}   "
                f"R5 {_fmt(self.r5, 'Ω')}   C1 {_fmt(self.c1, 'F')}",
                f"  D1 {self.d1.id} / D2 {self.d2.id} at {self.temp_c:g} °C; op amp swings "
                f"{_signed(vh, 'V')} / {_signed(-vl, 'V')} on rails {_signed(r.v_pos, 'V')} / "
                f"{_signed(r.v_neg, 'V')}",
                f"  square clamped at {_signed(float(p.square_high_v), 'V')} / "
                f"{_signed(float(p.square_low_v), 'V')} from the reference",
                f"  frequency {_fmt(float(p.frequency_hz), 'Hz')}, period "
                f"{_fmt(float(p.period_s), 's')}, high {100.0 * float(p.duty_high):.2f} %",
                f"  triangle {_fmt(float(p.amplitude_vpp), 'V')} p-p, midpoint "
                f"{_signed(float(p.offset_v), 'V')}; thresholds "
                f"{_signed(float(p.threshold_high_v), 'V')} / "
                f"{_signed(float(p.threshold_low_v), 'V')}",
                f"  effective switching delay {_fmt(float(p.effective_delay_s), 's')}, op-amp "
                f"timing {100.0 * float(p.timing_share):.1f} % of the period",
            ]
        )
