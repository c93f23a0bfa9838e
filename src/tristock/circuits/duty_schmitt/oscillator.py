"""One built set-duty oscillator: its values at a temperature, the op amp, the rails and the
steering diodes; ``prediction()`` runs ``physics.predict_point`` and ``str`` prints it."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

from tristock.circuits.diode import diode_at, thermal_voltage
from tristock.circuits.duty_schmitt.physics import DutyPoint, branch_currents, predict_point
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
class DutyOscillator:
    """R1, R2, R3A, R3B (Ω) and C1 (F) at ``temp_c`` (°C); U1 (both channels alike); D3
    (steers R3A's current while the square is high) and D4 (R3B's, low)."""

    r1: float
    r2: float
    r3a: float
    r3b: float
    c1: float
    opamp: OpAmpModel
    rails: Rails
    d3: Diode
    d4: Diode
    temp_c: float = 25.0

    def __post_init__(self) -> None:
        for name in ("r1", "r2", "r3a", "r3b", "c1"):
            v = getattr(self, name)
            if not (math.isfinite(v) and v > 0.0):
                raise ValueError(f"{name}: must be a positive finite value, got {v!r}")
        square_levels(self.rails, self.opamp)

    def point(self) -> DutyPoint:
        """The model's inputs (``physics.DutyPoint``)."""
        m = self.opamp
        _, rs3, _, vf3 = diode_at(self.d3, self.temp_c)
        _, rs4, _, vf4 = diode_at(self.d4, self.temp_c)
        if self.d3.is_zener or self.d4.is_zener:
            raise ValueError("d3/d4: the steering diodes must be signal diodes")
        return DutyPoint(
            r1=self.r1,
            r2=self.r2,
            r3a=self.r3a,
            r3b=self.r3b,
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
            vf3=vf3,
            rs3=rs3,
            vf4=vf4,
            rs4=rs4,
            vt_therm=float(thermal_voltage(self.temp_c)),
        )

    def prediction(self) -> Prediction:
        return self._prediction

    @cached_property
    def _prediction(self) -> Prediction:
        return predict_point(self.point(), self.rails.v_ref)

    def branch_currents(self) -> tuple[float, float]:
        """(I_A, I_B): the integrator's current while the square is high, and low (A)."""
        i_a, i_b = branch_currents(self.point(), self.rails.v_ref)
        return float(i_a), float(i_b)

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
        i_a, i_b = self.branch_currents()
        return "\n".join(
            [
                "set-duty triangle/square oscillator",
                f"  R1 {_fmt(self.r1, 'Ω')}   R2 {_fmt(self.r2, 'Ω')}   R3A {_fmt(self.r3a, 'Ω')}"
                f"   R3B {_fmt(self.r3b, 'Ω')}   C1 {_fmt(self.c1, 'F')}",
                f"  D3 {self.d3.id} / D4 {self.d4.id} at {self.temp_c:g} °C; rails "
                f"{_signed(r.v_pos, 'V')} / {_signed(r.v_neg, 'V')}; square "
                f"{_signed(float(p.square_high_v), 'V')} / {_signed(float(p.square_low_v), 'V')}",
                f"  integrator current {_fmt(i_a, 'A')} high (R3A, D3), {_fmt(i_b, 'A')} low "
                "(R3B, D4)",
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
