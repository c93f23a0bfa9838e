"""One built zener-clamped oscillator: its values at a temperature, the op amp, the rails and
the two zeners; ``prediction()`` runs ``physics.predict_point`` and ``str`` prints it (the
common half: ``circuits.opampvariant.VariantOscillator``)."""

from __future__ import annotations

from dataclasses import dataclass

from tristock.circuits.clamped_schmitt.physics import ClampPoint, predict_point
from tristock.circuits.diode import diode_at
from tristock.circuits.opampvariant import VariantOscillator, fmt, signed
from tristock.circuits.rails import OpAmpModel, Rails, square_levels
from tristock.circuits.topology import Prediction
from tristock.stock.diodes import Diode


@dataclass(frozen=True)
class ClampedOscillator(VariantOscillator):
    """R1, R2, R3, R5 (Ω) and C1 (F) at ``temp_c`` (°C); U1 (both channels alike); D1 (its
    breakdown clamps the square high) and D2 (low), catalogued zeners moved to ``temp_c``."""

    value_fields = ("r1", "r2", "r3", "r5", "c1")
    diode_fields = ("d1", "d2")

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

    def check_diodes(self) -> None:
        for name in self.diode_fields:
            if not getattr(self, name).is_zener:
                raise ValueError(f"{name}: {getattr(self, name).id} is not a zener")

    def point(self) -> ClampPoint:
        """The model's inputs (``physics.ClampPoint``)."""
        vz1, rz1, izt1, vf1 = diode_at(self.d1, self.temp_c)
        vz2, rz2, izt2, vf2 = diode_at(self.d2, self.temp_c)
        return ClampPoint(
            r1=self.r1,
            r2=self.r2,
            r3=self.r3,
            r5=self.r5,
            c1=self.c1,
            vz1=vz1,
            rz1=rz1,
            izt1=izt1,
            vf1=vf1,
            vz2=vz2,
            rz2=rz2,
            izt2=izt2,
            vf2=vf2,
            **self.loop_fields(),
        )

    def predict(self, point: ClampPoint) -> Prediction:
        return predict_point(point, self.rails.v_ref)

    def __str__(self) -> str:
        p = self.prediction()
        r = self.rails
        vh, vl = square_levels(r, self.opamp)
        return "\n".join(
            [
                "zener-clamped triangle/square oscillator",
                f"  R1 {fmt(self.r1, 'Ω')}   R2 {fmt(self.r2, 'Ω')}   R3 {fmt(self.r3, 'Ω')}   "
                f"R5 {fmt(self.r5, 'Ω')}   C1 {fmt(self.c1, 'F')}",
                f"  D1 {self.d1.id} / D2 {self.d2.id} at {self.temp_c:g} °C; op amp swings "
                f"{signed(vh, 'V')} / {signed(-vl, 'V')} on rails {signed(r.v_pos, 'V')} / "
                f"{signed(r.v_neg, 'V')}",
                f"  square clamped at {signed(float(p.square_high_v), 'V')} / "
                f"{signed(float(p.square_low_v), 'V')} from the reference",
                *self.timing_lines(),
            ]
        )
