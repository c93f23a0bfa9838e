"""The analysis is generic over the topology interface: a circuit that is not registered, with
its own point fields and its own spread variables, is analysed through ``Topology`` alone.

The test double is a zener-clamped square driving an ideal integrator and an ideal Schmitt
trigger (the shape of the clamped variant of the next circuit issue, without its load terms):
square levels ±Vc with Vc = Vz + Vf, independent of the rails; thresholds ±Vc·k, k = R1/R2;
T = 4·k·R3·C1, so f = R2/(4·R1·R3·C1), triangle Vpp = 2·Vc·k, duty 1/2 (the ideal-switch
textbook result, e.g. Sedra & Smith, Microelectronic Circuits, bistable multivibrator with an
integrator; cited from memory). Its spread: the four part tolerances, the zener's tolerance
("D1"), a ± bound on the diode drop ("D1.vf"), and temperature moving Vz by +3 mV/°C and Vf by
-2 mV/°C (absolute tempcos; invented values). Every expected figure below is worked out by
hand from those formulas.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

import numpy as np
import pytest

from tristock.analysis.bundle import analyse
from tristock.analysis.montecarlo import monte_carlo
from tristock.analysis.sensitivity import sensitivities, temperature_drift
from tristock.analysis.worstcase import worst_case
from tristock.circuits.board import Design
from tristock.circuits.checks import Warning
from tristock.circuits.rails import Rails
from tristock.circuits.spreadvars import (
    SpreadBox,
    SpreadVariable,
    added,
    temperature,
    tolerance,
)
from tristock.circuits.timeloop import Loop
from tristock.circuits.topology import BoardParts, PartRole, Prediction, Topology
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, OpAmp, Resistor, value_at

VZ, VZ_TOL, VZ_DRIFT = 4.7, 0.05, 3e-3  # V, fraction, V/°C
VF, VF_BOUND, VF_DRIFT = 0.65, 0.05, -2e-3  # V, V, V/°C


@dataclass(frozen=True)
class ClampPoint:
    r1: Any
    r2: Any
    r3: Any
    c1: Any
    vz: Any
    vf: Any


def clamp_predict(p: ClampPoint) -> Prediction:
    vc = np.asarray(p.vz) + np.asarray(p.vf)
    k = np.asarray(p.r1) / np.asarray(p.r2)
    period = 4.0 * k * np.asarray(p.r3) * np.asarray(p.c1)
    return Prediction(
        frequency_hz=1.0 / period,
        period_s=period,
        duty_high=0.5 + 0.0 * period,
        amplitude_vpp=2.0 * vc * k,
        offset_v=0.0 * vc,
        square_high_v=vc,
        square_low_v=-vc,
        threshold_high_v=vc * k,
        threshold_low_v=-vc * k,
        peak_high_v=vc * k,
        peak_low_v=-vc * k,
        slope_v_per_s=vc / (np.asarray(p.r3) * np.asarray(p.c1)),
        effective_delay_s=0.0 * vc,
        timing_share=0.0 * vc,
    )


@dataclass(frozen=True)
class Built:
    point: ClampPoint

    def prediction(self) -> Prediction:
        return clamp_predict(self.point)


def value(parts: dict[str, Any], name: str, temp_c: float) -> float:
    part = parts[name]
    base = part.value_f if isinstance(part, Capacitor) else part.value_ohm
    return value_at(base, part.tempco_ppm or 0.0, temp_c)


class ClampedDouble(Topology):
    """A test double: only what the analysis reads is implemented."""

    name = "clamped_double"
    roles = (
        PartRole("U1", "opamps", "integrator and trigger"),
        PartRole("R1", "resistors", "threshold"),
        PartRole("R2", "resistors", "threshold feedback"),
        PartRole("R3", "resistors", "integrator input"),
        PartRole("C1", "capacitors", "integrator capacitor"),
    )
    sketch = "U1 R1 R2 R3 C1 (D1/D2 clamp)"
    accuracy = duty_accuracy = spice_accuracy = 1e-3
    demo_board = MappingProxyType({})
    demo_rails = (12.0, -12.0)
    sensitivity_fields = MappingProxyType(
        {n: (n.lower(),) for n in ("R1", "R2", "R3", "C1")} | {"D1": ("vz",), "D1.vf": ("vf",)}
    )

    def predict(self, point: Any, v_ref: float | None, control: str = "series") -> Prediction:
        return clamp_predict(point)

    def board_point(self, design: BoardParts, rails: Rails, temp_c: float) -> ClampPoint:
        parts = design.parts()
        r1, r2, r3, c1 = (value(parts, n, temp_c) for n in ("R1", "R2", "R3", "C1"))
        return ClampPoint(
            r1,
            r2,
            r3,
            c1,
            vz=VZ + VZ_DRIFT * (temp_c - 25.0),
            vf=VF + VF_DRIFT * (temp_c - 25.0),
        )

    def oscillator(self, design: BoardParts, rails: Rails, temp_c: float = 25.0) -> Built:
        return Built(self.board_point(design, rails, temp_c))

    def check(self, design: BoardParts, rails: Rails) -> list[Warning]:
        return []

    def time_domain(self, oscillator: Any) -> Loop:
        raise NotImplementedError("test double: no time-domain loop")

    def netlist(self, oscillator: Any, *, periods: int = 4) -> str:
        raise NotImplementedError("test double: no netlist")

    def search_form(self) -> Any:
        raise NotImplementedError("test double: not searched")

    def spread(self, design: BoardParts, spec: Spec) -> SpreadBox:
        parts = design.parts()
        env = spec.environment
        variables: list[SpreadVariable] = [
            tolerance(n, n.lower(), value(parts, n, 25.0), parts[n].tolerance_pct / 100, u)  # type: ignore[union-attr]
            for n, u in (("R1", "Ω"), ("R2", "Ω"), ("R3", "Ω"), ("C1", "F"))
        ]
        variables.append(tolerance("D1", "vz", VZ, VZ_TOL, "V"))
        variables.append(added("D1.vf", ("vf",), VF_BOUND, lambda z: f"{VF + VF_BOUND * z:.3f} V"))
        variables.append(
            temperature(env.temp_min_c, env.temp_max_c, {}, {"vz": VZ_DRIFT, "vf": VF_DRIFT})
        )
        return SpreadBox(self.board_point(design, Rails(12.0, -12.0), 25.0), tuple(variables))

    def drive_imbalance(self, point: Any, v_ref: float | None, control: str = "series") -> Any:
        return np.zeros(np.shape(np.asarray(point.vz)))


DOUBLE = ClampedDouble()
T1, T2, T3, TC = 0.01, 0.01, 0.005, 0.02
R1, R2, R3, C1 = 10e3, 20e3, 10e3, 10e-9
AMP = 2 * (VZ + VF) * R1 / R2  # 5.35 Vpp
FREQ = R2 / (4 * R1 * R3 * C1)  # 5 kHz


def design() -> Design:
    def res(code: str, v: float, tol: float) -> Resistor:
        return Resistor(code, v, tol * 100, 0.0, "E96", 0.25, "0603", 0.01, 1000)

    amp = OpAmp("UT-1", 2, 3.0, 40.0, 1.0, 1.0, math.inf, math.inf, 0.0, 0.0, 0.0, 0.02, 0.5, 100)
    cap = Capacitor("CT-1", C1, "C0G", TC * 100, 0.0, None, 50.0, "0805", 0.05, 1000)
    return Design(
        amp, res("RT-1", R1, T1), res("RT-2", R2, T2), res("RT-3", R3, T3), cap, topology=DOUBLE
    )


def spec(f_tol: float = 10.0, amp_tol: float = 10.0) -> Spec:
    return parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 10.0},
            "frequency": {"target_hz": FREQ, "tolerance_pct": f_tol},
            "triangle": {"amplitude_vpp": AMP, "tolerance_pct": amp_tol},
            "environment": {"temp_min_c": -20.0, "temp_max_c": 70.0},
        }
    )


def test_the_worst_case_is_the_hand_worked_corner() -> None:
    wc = worst_case(design(), spec())
    # the clamp's levels do not follow the rails: no rail variable although V± spread 10 %
    assert wc.variables == ("R1", "R2", "R3", "C1", "D1", "D1.vf", "T")
    assert wc.method == "corners+box"
    f_hi = R2 * (1 + T2) / (4 * R1 * (1 - T1) * R3 * (1 - T3) * C1 * (1 - TC))
    f_lo = R2 * (1 - T2) / (4 * R1 * (1 + T1) * R3 * (1 + T3) * C1 * (1 + TC))
    assert wc.frequency_hz == pytest.approx((f_lo, f_hi), rel=1e-12)
    # Vc = Vz·(1 + tol·z) + Vf + bound·z + (3 - 2) mV/°C·(T - 25 °C): highest at 70 °C
    vc_hi = VZ * (1 + VZ_TOL) + VF + VF_BOUND + 45 * (VZ_DRIFT + VF_DRIFT)
    vc_lo = VZ * (1 - VZ_TOL) + VF - VF_BOUND - 45 * (VZ_DRIFT + VF_DRIFT)
    a_hi = 2 * vc_hi * R1 * (1 + T1) / (R2 * (1 - T2))
    a_lo = 2 * vc_lo * R1 * (1 - T1) / (R2 * (1 + T2))
    assert wc.amplitude_vpp == pytest.approx((a_lo, a_hi), rel=1e-12)
    assert wc.duty_high == (0.5, 0.5)
    at_hi = wc.corners["amplitude_vpp_hi"]
    assert at_hi["T"] == "70 °C" and at_hi["D1.vf"] == "0.700 V"
    assert at_hi["D1"] == "4.94 V (+5 %)"


def test_monte_carlo_stays_inside_the_worst_case() -> None:
    wc = worst_case(design(), spec())
    mc = monte_carlo(design(), spec(), samples=4000, seed=3, distribution="uniform")
    f, a = mc.spread["frequency_hz"], mc.spread["amplitude_vpp"]
    assert wc.frequency_hz[0] <= f["min"] < f["max"] <= wc.frequency_hz[1]
    assert wc.amplitude_vpp[0] <= a["min"] < a["max"] <= wc.amplitude_vpp[1]
    assert mc.spread["duty_high"]["min"] == mc.spread["duty_high"]["max"] == 0.5
    # bands wider than the worst case pass every board; a band inside it fails some
    assert monte_carlo(design(), spec(20.0, 20.0), samples=500, seed=1).fraction == 1.0
    assert monte_carlo(design(), spec(0.5, 0.5), samples=500, seed=1).fraction < 1.0


def test_sensitivities_and_drift_follow_the_formulas() -> None:
    s = sensitivities(design(), spec())
    # f = R2/(4·R1·R3·C1): exponents; Vpp = 2·(Vz + Vf)·R1/R2
    expected_f = {"R1": -1.0, "R2": 1.0, "R3": -1.0, "C1": -1.0, "D1": 0.0, "D1.vf": 0.0}
    expected_a = {"R1": 1.0, "R2": -1.0, "R3": 0.0, "C1": 0.0}
    expected_a |= {"D1": VZ / (VZ + VF), "D1.vf": VF / (VZ + VF)}
    assert s.frequency == pytest.approx(expected_f, abs=1e-8)
    assert s.amplitude == pytest.approx(expected_a, abs=1e-8)
    d = temperature_drift(design(), spec())
    assert d.frequency_ppm_per_c == pytest.approx(0.0, abs=1e-9)
    assert d.amplitude_ppm_per_c == pytest.approx(1e6 * 1e-3 / (VZ + VF), rel=1e-9)


def test_the_bundle_reports_the_double() -> None:
    result = analyse(design(), spec(), samples=500).to_dict()
    assert result["predicted"]["frequency_hz"] == pytest.approx(FREQ, rel=1e-12)
    assert result["predicted"]["amplitude_vpp"] == pytest.approx(AMP, rel=1e-12)
    assert result["worst_case"]["variables"][-1] == "T"
