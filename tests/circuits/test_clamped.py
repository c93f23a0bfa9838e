"""The zener-clamped model (``circuits.clamped_schmitt``) without ngspice: its clamp levels
against a root of the square node's current balance found by scipy, its ideal-switch limit
against the textbook period, the amplitude's independence from the rails, vectorisation,
and its checks."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pytest
from scipy.optimize import brentq

from tristock.circuits.clamped_schmitt.oscillator import ClampedOscillator
from tristock.circuits.clamped_schmitt.physics import predict_point
from tristock.circuits.diode import Junction
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.topology import Prediction
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import load_catalog

CATALOG = load_catalog(demo_catalog_dir())
Z51 = CATALOG.get("GD-Z5V1-02")
Z33 = CATALOG.get("GD-Z3V3-05")
IDEAL = OpAmpModel(1.5, 1.5, math.inf, math.inf, 0.0, math.inf)
REAL = OpAmpModel(1.5, 1.5, 13e6, 13e6, 1.2e-6, 3e6, offset_v=3e-3, bias_a=3e-11)


def osc(
    opamp: OpAmpModel = REAL,
    rails: tuple[float, float] = (12, -12),
    zeners: tuple[Any, Any] = (Z51, Z33),
    **kw: float,
) -> ClampedOscillator:
    values = {"r1": 10e3, "r2": 22e3, "r3": 47e3, "r5": 2.2e3, "c1": 4.7e-9, **kw}
    return ClampedOscillator(opamp=opamp, rails=Rails(*rails), d1=zeners[0], d2=zeners[1], **values)


def test_clamp_levels_solve_the_square_nodes_current_balance() -> None:
    o = osc(IDEAL)
    p = o.prediction()
    z1, z2 = Junction.of(Z51), Junction.of(Z33)  # type: ignore[arg-type]
    vt = 0.5 * (float(p.threshold_high_v) + float(p.threshold_low_v))

    def pair_voltage(i: float, breaking: Junction, forward: Junction) -> float:
        return float(breaking.breakdown_voltage(i)) + float(forward.forward_drop(i))

    def level(vo: float, breaking: Junction, forward: Junction, sign: float) -> float:
        # current balance at the square node, solved for the pair's current by scipy's brentq
        def balance(i: float) -> float:
            s = sign * pair_voltage(i, breaking, forward)
            return (vo - s) / o.r5 - sign * i - s / o.r3 - (s - vt) / (o.r1 + o.r2)

        i = brentq(balance, 1e-9, 0.1, xtol=1e-15)
        return sign * pair_voltage(i, breaking, forward)

    # reference: scipy's brentq on the node's currents with the ngspice-checked junctions
    # (the model linearises the level in the triangle about 0 V: a few µV off at its midpoint)
    assert float(p.square_high_v) == pytest.approx(level(10.5, z1, z2, 1.0), abs=2e-5)
    assert float(p.square_low_v) == pytest.approx(level(-10.5, z2, z1, -1.0), abs=2e-5)


def test_ideal_switching_gives_the_textbook_period() -> None:
    # a large R1 + R2 leaves the clamp's load nearly constant over the ramp
    o = osc(IDEAL, r1=100e3, r2=1e6, r3=10e3, r5=1e3)
    p = o.prediction()
    vh, vl = float(p.square_high_v), -float(p.square_low_v)
    k = o.r1 / o.r2
    textbook = o.r3 * o.c1 * k * (vh + vl) ** 2 / (vh * vl)  # Sedra & Smith form, from memory
    assert float(p.period_s) == pytest.approx(textbook, rel=2e-4)
    assert float(p.duty_high) == pytest.approx(vl / (vh + vl), abs=2e-4)


def test_the_amplitude_no_longer_follows_the_rails() -> None:
    # rails up 25 % (an op-amp loop's amplitude would follow: +29 %): with 6.2 V zeners the
    # clamp current rises 2.1 -> 3.5 mA and the level by that times the pair's dynamic
    # resistance (about 20 Ω breakdown + N·Vt/I forward), so the amplitude by 1.3 %; with 5.1 V
    # and 3.3 V zeners (55 and 90 Ω at 5 mA) by 4 %
    z62 = CATALOG.get("GD-Z6V2-02")
    stiff = [osc(rails=r, zeners=(z62, z62)).prediction() for r in ((12, -12), (15, -15))]
    soft = [osc(rails=r).prediction() for r in ((12, -12), (15, -15))]
    assert float(stiff[1].amplitude_vpp) / float(stiff[0].amplitude_vpp) - 1 < 0.02
    assert float(soft[1].amplitude_vpp) / float(soft[0].amplitude_vpp) - 1 < 0.05


def test_predict_broadcasts_like_scalars() -> None:
    base = osc().point()
    rails = np.array([11.0, 12.0, 15.0])
    arrays = predict_point(dataclasses.replace(base, v_pos=rails, v_neg=-rails), None)
    for n, v in enumerate(rails):
        one = predict_point(dataclasses.replace(base, v_pos=float(v), v_neg=-float(v)), None)
        for name in Prediction._fields:
            assert float(np.asarray(getattr(arrays, name))[n]) == pytest.approx(
                float(getattr(one, name)), rel=1e-12, abs=1e-15
            ), name


def test_checks_flag_a_clamp_that_does_not_clamp_and_an_overloaded_zener() -> None:
    from tristock.circuits.clamped_schmitt.checks import check

    parts = {r: CATALOG.get(i) for r, i in (("R1", "R1F-10K0"), ("R2", "R1F-22K1"))}
    parts |= {"R3": CATALOG.get("R1F-47K5"), "R5": CATALOG.get("R1F-2K00")}

    z62 = CATALOG.get("GD-Z6V2-02")

    def codes(o: ClampedOscillator) -> dict[str, str]:
        found = check(
            o,
            opamp=CATALOG.get("GA-JF2"),  # type: ignore[arg-type]
            resistors=parts,  # type: ignore[arg-type]
            capacitor=CATALOG.get("CPPG-4N70"),  # type: ignore[arg-type]
            zeners={"D1": o.d1, "D2": o.d2},
        )
        return {w.code: w.severity for w in found}

    assert "clamp_not_clamping" not in codes(osc())
    assert codes(osc(r5=100e3))["clamp_not_clamping"] == "error"
    # 22 Ω from 10.5 V into a 6.2 V pair: about 0.16 A, 1 W in a 0.5 W zener
    assert codes(osc(r5=22.0, zeners=(z62, z62)))["zener_power"] == "error"
