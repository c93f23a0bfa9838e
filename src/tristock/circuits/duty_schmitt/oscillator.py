"""One built set-duty oscillator: its values at a temperature, the op amp, the rails and the
steering diodes; ``prediction()`` runs ``physics.predict_point`` and ``str`` prints it (the
common half: ``circuits.opampvariant.VariantOscillator``)."""

from __future__ import annotations

from dataclasses import dataclass

from tristock.circuits.diode import diode_at
from tristock.circuits.duty_schmitt.physics import DutyPoint, branch_currents, predict_point
from tristock.circuits.opampvariant import VariantOscillator, fmt, signed
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.topology import Prediction
from tristock.stock.diodes import Diode


@dataclass(frozen=True)
class DutyOscillator(VariantOscillator):
    """R1, R2, R3A, R3B (Ω) and C1 (F) at ``temp_c`` (°C); U1 (both channels alike); D3
    (steers R3A's current while the square is high) and D4 (R3B's, low)."""

    value_fields = ("r1", "r2", "r3a", "r3b", "c1")
    diode_fields = ("d3", "d4")

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

    def point(self) -> DutyPoint:
        """The model's inputs (``physics.DutyPoint``)."""
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
            vf3=vf3,
            rs3=rs3,
            vf4=vf4,
            rs4=rs4,
            **self.loop_fields(),
        )

    def predict(self, point: DutyPoint) -> Prediction:
        return predict_point(point, self.rails.v_ref)

    def branch_currents(self) -> tuple[float, float]:
        """(I_A, I_B): the integrator's current while the square is high, and low (A)."""
        i_a, i_b = branch_currents(self.point(), self.rails.v_ref)
        return float(i_a), float(i_b)

    def __str__(self) -> str:
        p = self.prediction()
        r = self.rails
        i_a, i_b = self.branch_currents()
        return "\n".join(
            [
                "set-duty triangle/square oscillator",
                f"  R1 {fmt(self.r1, 'Ω')}   R2 {fmt(self.r2, 'Ω')}   R3A {fmt(self.r3a, 'Ω')}"
                f"   R3B {fmt(self.r3b, 'Ω')}   C1 {fmt(self.c1, 'F')}",
                f"  D3 {self.d3.id} / D4 {self.d4.id} at {self.temp_c:g} °C; rails "
                f"{signed(r.v_pos, 'V')} / {signed(r.v_neg, 'V')}; square "
                f"{signed(float(p.square_high_v), 'V')} / {signed(float(p.square_low_v), 'V')}",
                f"  integrator current {fmt(i_a, 'A')} high (R3A, D3), {fmt(i_b, 'A')} low "
                "(R3B, D4)",
                *self.timing_lines(),
            ]
        )
