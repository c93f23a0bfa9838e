"""The comparator-IC loop as one vectorised point (every input of ``physics.predict`` plus the
rails, as floats or broadcastable arrays), the built oscillator, and the board's values."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cached_property
from typing import TypeVar

import numpy as np

from tristock.circuits.comparator_schmitt.physics import predict
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.topology import BoardParts, FloatArray, Prediction, Value
from tristock.stock.comparators import Comparator
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor, value_at
from tristock.stock.units import format_value

P = TypeVar("P", bound=Part)


@dataclass(frozen=True)
class ComparatorPoint:
    """Every argument of ``predict`` plus the rails. ``r5`` is the pull-up (0: push-pull);
    ``headroom`` the push-pull high level below V+ (0 for open-drain), ``vol`` the low level
    above V-; ``delay``/``rise``/``fall`` of U2 (s); ``gbw``, ``vos1``, ``ib1`` of U1's
    integrator channel; ``vos2``, ``ib2`` of U2."""

    r1: Value
    r2: Value
    r3: Value
    c1: Value
    r5: Value
    v_pos: Value
    v_neg: Value
    headroom: Value
    vol: Value
    delay: Value
    rise: Value
    fall: Value
    gbw: Value
    vos1: Value
    ib1: Value
    vos2: Value
    ib2: Value


def reference_of(v_pos: Value, v_neg: Value, v_ref: float | None) -> FloatArray:
    """The reference node (V): the fixed one, else 0 V for split rails, mid-rail for a single
    supply (``rails.Rails``)."""
    if v_ref is not None:
        return np.asarray(v_ref, dtype=float)
    vp, vn = np.asarray(v_pos, dtype=float), np.asarray(v_neg, dtype=float)
    return np.asarray(np.where(vn < 0.0, 0.0, (vp + vn) / 2.0), dtype=float)


def predict_point(point: ComparatorPoint, v_ref: float | None) -> Prediction:
    """``predict`` at ``point``: high source Hs = V+ - headroom - ref, low level L = ref -
    (V- + VOL), both from the reference."""
    ref = reference_of(point.v_pos, point.v_neg, v_ref)
    return predict(
        point.r1,
        point.r2,
        point.r3,
        point.c1,
        np.asarray(point.v_pos) - point.headroom - ref,
        ref - (np.asarray(point.v_neg) + point.vol),
        pull_up=point.r5,
        delay=point.delay,
        rise=point.rise,
        fall=point.fall,
        gbw=point.gbw,
        vos1=point.vos1,
        ib1=point.ib1,
        vos2=point.vos2,
        ib2=point.ib2,
    )


def part_of(parts: Mapping[str, Part], designator: str, kind: type[P]) -> P:
    """The part at ``designator``, which must be a ``kind``."""
    part = parts[designator]
    if not isinstance(part, kind):
        raise TypeError(f"{designator}: expected a {kind.__name__}, got {type(part).__name__}")
    return part


def _fmt(value: float, unit: str) -> str:
    return format_value(value, unit, digits=3)


@dataclass(frozen=True)
class ComparatorOscillator:
    """One built comparator-IC oscillator: R1, R2, R3, R5 (Ω; R5 = 0 without a pull-up) and
    C1 (F) at temperature, U1's integrator channel (``OpAmpModel``), U2 and the rails."""

    r1: float
    r2: float
    r3: float
    c1: float
    r5: float
    opamp: OpAmpModel
    comparator: Comparator
    rails: Rails

    def __post_init__(self) -> None:
        for name in ("r1", "r2", "r3", "c1"):
            value = float(getattr(self, name))
            if not (math.isfinite(value) and value > 0.0):
                raise ValueError(f"{name}: must be a positive finite value, got {value!r}")
        if self.comparator.is_open_drain and not self.r5 > 0.0:
            raise ValueError(f"R5: the open-drain {self.comparator.id} needs a pull-up")

    @property
    def point(self) -> ComparatorPoint:
        u2, m, rails = self.comparator, self.opamp, self.rails
        return ComparatorPoint(
            r1=self.r1, r2=self.r2, r3=self.r3, c1=self.c1,
            r5=self.r5 if u2.is_open_drain else 0.0,
            v_pos=rails.v_pos, v_neg=rails.v_neg,
            headroom=u2.voh_headroom_v or 0.0, vol=u2.vol_v,
            delay=u2.delay_s, rise=u2.rise_s, fall=u2.fall_s,
            gbw=m.gbw_hz, vos1=m.offset_v, ib1=m.bias_a, vos2=u2.offset_v, ib2=u2.bias_a,
        )  # fmt: skip

    def prediction(self) -> Prediction:
        """The model's figures (``physics.predict``); computed once."""
        return self._prediction

    @cached_property
    def _prediction(self) -> Prediction:
        return predict_point(self.point, self.rails.v_ref)

    @property
    def k(self) -> float:
        return self.r1 / self.r2

    @property
    def frequency_hz(self) -> float:
        return float(self.prediction().frequency_hz)

    @property
    def period_s(self) -> float:
        return float(self.prediction().period_s)

    def __str__(self) -> str:
        p = self.prediction()
        u2 = self.comparator
        stage = f"open-drain, R5 {_fmt(self.r5, 'Ω')} pull-up" if u2.is_open_drain else "push-pull"
        return "\n".join(
            [
                "triangle/square oscillator, comparator-IC Schmitt stage",
                f"  R1 {_fmt(self.r1, 'Ω')}   R2 {_fmt(self.r2, 'Ω')}   R3 {_fmt(self.r3, 'Ω')}"
                f"   C1 {_fmt(self.c1, 'F')}   k = R1/R2 = {self.k:.4g}",
                f"  U2 {u2.id} ({stage}): delay {_fmt(u2.delay_s, 's')}, rise "
                f"{_fmt(u2.rise_s, 's')}, fall {_fmt(u2.fall_s, 's')}",
                f"  rails {self.rails.v_pos:+g} V / {self.rails.v_neg:+g} V, reference "
                f"{_fmt(self.rails.reference_v, 'V')}; square {float(p.square_high_v):+.4g} V "
                f"(at mid triangle) / {float(p.square_low_v):+.4g} V from the reference",
                f"  frequency {_fmt(float(p.frequency_hz), 'Hz')}, period "
                f"{_fmt(float(p.period_s), 's')}, high {100.0 * float(p.duty_high):.2f} %",
                f"  triangle {_fmt(float(p.amplitude_vpp), 'V')} p-p, midpoint "
                f"{float(p.offset_v):+.4g} V; thresholds {float(p.threshold_high_v):+.4g} V / "
                f"{float(p.threshold_low_v):+.4g} V",
                f"  switching: effective delay {_fmt(float(p.effective_delay_s), 's')}, "
                f"{100.0 * float(p.timing_share):.2f} % of the period",
            ]
        )


def oscillator_of(design: BoardParts, rails: Rails, temp_c: float = 25.0) -> ComparatorOscillator:
    """The board at ``temp_c`` (°C): each resistor and C1 moved by its tempco (a class II
    capacitor at its nominal value); U1 gives its integrator channel, U2 the comparator."""
    parts = design.parts()

    def resistor(name: str) -> float:
        r = part_of(parts, name, Resistor)
        return value_at(r.value_ohm, r.tempco_ppm, temp_c)

    cap = part_of(parts, "C1", Capacitor)
    return ComparatorOscillator(
        r1=resistor("R1"),
        r2=resistor("R2"),
        r3=resistor("R3"),
        c1=value_at(cap.value_f, cap.tempco_ppm or 0.0, temp_c),
        r5=resistor("R5") if "R5" in parts else 0.0,
        opamp=OpAmpModel.from_part(part_of(parts, "U1", OpAmp)),
        comparator=part_of(parts, "U2", Comparator),
        rails=rails,
    )
