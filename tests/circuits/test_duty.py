"""The set-duty model (``circuits.duty_schmitt``) without ngspice: its branch currents
against roots of the diode equation found by scipy, its ideal-switch limit (period and high
share from the two ramps), vectorisation, and its checks."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from tristock.circuits.diode import Junction
from tristock.circuits.duty_schmitt.checks import check
from tristock.circuits.duty_schmitt.oscillator import DutyOscillator
from tristock.circuits.duty_schmitt.physics import predict_point
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.topology import Prediction
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import load_catalog

CATALOG = load_catalog(demo_catalog_dir())
SW, SK = CATALOG.get("GD-SW1"), CATALOG.get("GD-SK1")
IDEAL = OpAmpModel(1.5, 1.5, math.inf, math.inf, 0.0, math.inf)
REAL = OpAmpModel(1.5, 1.5, 13e6, 13e6, 1.2e-6, 3e6, offset_v=3e-3, bias_a=3e-11)


def osc(
    opamp: OpAmpModel = REAL, r3a: float = 22e3, r3b: float = 88.7e3, diodes: tuple = (SW, SW)
) -> DutyOscillator:
    return DutyOscillator(10e3, 22e3, r3a, r3b, 4.7e-9, opamp, Rails(12, -12), diodes[0], diodes[1])


def test_branch_currents_solve_the_diode_equation() -> None:
    o = osc(IDEAL)
    i_a, i_b = o.branch_currents()
    d = Junction.of(SW)  # type: ignore[arg-type]
    leak = d.is_a  # the blocking diode's reverse saturation current

    def branch(v: float, r: float) -> float:
        return float(
            brentq(lambda i: float(d.forward_drop(i)) + r * i - v, 1e-12, 1e-2, xtol=1e-18)
        )

    # reference: scipy's brentq on the ngspice-checked junction (whose "- 1" in the diode
    # equation the model's ln I leaves out: 2e-8 of the current)
    assert i_a == pytest.approx(branch(10.5, o.r3a) + leak, rel=1e-7)
    assert i_b == pytest.approx(branch(10.5, o.r3b) + leak, rel=1e-7)


def test_ideal_switching_gives_the_two_ramps() -> None:
    o = osc(IDEAL)
    p = o.prediction()
    i_a, i_b = o.branch_currents()
    hysteresis = float(p.threshold_high_v) - float(p.threshold_low_v)
    assert hysteresis == pytest.approx(10.5 * 2 * 10 / 22, rel=1e-12)
    # common practice: each ramp takes C1·ΔV/I; the high share is t_A/T = I_B/(I_A + I_B)
    t_a, t_b = o.c1 * hysteresis / i_a, o.c1 * hysteresis / i_b
    assert float(p.period_s) == pytest.approx(t_a + t_b, rel=1e-9)
    assert float(p.duty_high) == pytest.approx(i_b / (i_a + i_b), abs=1e-9)
    assert float(p.duty_high) == pytest.approx(22 / (22 + 88.7), abs=0.01)  # ≈ R3A/(R3A + R3B)


def test_predict_broadcasts_like_scalars() -> None:
    base = osc().point()
    r3a = np.array([10e3, 22e3, 100e3])
    arrays = predict_point(dataclasses.replace(base, r3a=r3a), None)
    for n, v in enumerate(r3a):
        one = predict_point(dataclasses.replace(base, r3a=float(v)), None)
        for name in Prediction._fields:
            assert float(np.asarray(getattr(arrays, name))[n]) == pytest.approx(
                float(getattr(one, name)), rel=1e-12, abs=1e-15
            ), name


def test_checks_flag_schottky_leakage_and_reverse_voltage() -> None:
    parts = {r: CATALOG.get("R1F-22K1") for r in ("R1", "R2", "R3A", "R3B")}

    def codes(o: DutyOscillator) -> set[str]:
        found = check(
            o,
            opamp=CATALOG.get("GA-JF2"),  # type: ignore[arg-type]
            resistors=parts,  # type: ignore[arg-type]
            capacitor=CATALOG.get("CPPG-4N70"),  # type: ignore[arg-type]
            diodes={"D3": o.d3, "D4": o.d4},
        )
        return {w.code for w in found}

    assert codes(osc()) == set()
    assert "diode_leakage" in codes(osc(diodes=(SK, SK)))
    wide = dataclasses.replace(osc(), rails=Rails(25, -5))  # D4 blocks 23.5 V
    assert "diode_reverse" in codes(wide)
