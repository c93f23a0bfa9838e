"""Diode junctions and chains (``circuits.diode``): the closed forms against scipy's
quadrature and root finding, and the junction models against ngspice's own diode model."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from ngspice_harness import require_ngspice, run_ngspice
from tristock.circuits.diode import (
    Junction,
    forward_chain,
    thermal_voltage,
    zener_chain,
)
from tristock.stock.diodes import Diode

ZENER = Diode("Z", "zener", 5.1, 5e-3, 2.0, 0.3, 55.0, 0.72, 0.5, 0.04, 1)
SIGNAL = Diode("S", "signal", None, None, 10.0, -2.0, 0.8, 0.62, 0.5, 0.01, 1)


def test_thermal_voltage_at_25_c() -> None:
    # kT/q at 298.15 K from the CODATA constants: 25.693 mV (common textbook value, from memory)
    assert float(thermal_voltage(25.0)) == pytest.approx(0.025693, abs=2e-6)


def test_junction_reproduces_the_table_at_its_test_points() -> None:
    z = Junction.of(ZENER)
    assert float(z.breakdown_voltage(5e-3)) == pytest.approx(5.1, abs=1e-12)
    # (the diode equation's "- 1" moves the drop by N·Vt·IS/I: 2e-8 V here, 4e-6 V hot)
    assert float(z.forward_drop(1e-3)) == pytest.approx(0.72, abs=1e-7)
    # dynamic resistance at the test current: NBV·Vt/I + RS = rz_ohm
    slope = (float(z.breakdown_voltage(5.001e-3)) - float(z.breakdown_voltage(4.999e-3))) / 2e-6
    assert slope == pytest.approx(55.0, rel=1e-6)
    s = Junction.of(SIGNAL, 75.0)
    assert float(s.forward_drop(1e-3)) == pytest.approx(0.62 - 0.1, abs=1e-5)  # -2 mV/°C x 50


def test_chain_integral_and_current_against_scipy() -> None:
    zener = (5.1, 55.0, 5e-3, 0.72)
    chain = zener_chain(zener, zener, float(thermal_voltage(25.0)))
    current = 3e-3
    # ∫_0^I V dI' by scipy's adaptive quadrature (reference) against the closed form
    numeric, _ = quad(lambda i: float(chain.voltage(i)), 0.0, current, limit=200)
    assert float(chain.integral(current)) == pytest.approx(numeric, rel=1e-9)
    # the current behind a Thevenin source by scipy's brentq (reference)
    e, r = 9.0, 1.8e3
    root = brentq(lambda i: float(chain.voltage(i)) + r * i - e, 1e-9, 1e-2, xtol=1e-16)
    assert float(chain.current(e, r)) == pytest.approx(root, rel=1e-9)
    fwd = forward_chain(0.62, 0.8, float(thermal_voltage(25.0)))
    assert float(fwd.voltage(1e-3)) == pytest.approx(0.62, abs=1e-12)
    assert np.allclose(fwd.current(np.array([0.0, 10.0]), 1e4)[0], math.exp(-41.0), rtol=1e-6)


@pytest.mark.ngspice
def test_junction_models_match_ngspice_operating_points() -> None:
    require_ngspice()
    z, s = Junction.of(ZENER), Junction.of(SIGNAL)
    text = "\n".join(
        [
            "* diode operating points",
            ".options temp=25 tnom=25",
            z.spice_model("DZ"),
            s.spice_model("DS"),
            "I1 0 a 2m",
            "D1 0 a DZ",
            "I2 0 b 3m",
            "D2 b 0 DZ",
            "I3 0 c 0.3m",
            "D3 c 0 DS",
            ".tran 1n 10n",
            ".meas tran va FIND v(a) AT=5n",
            ".meas tran vb FIND v(b) AT=5n",
            ".meas tran vc FIND v(c) AT=5n",
            ".end",
        ]
    )
    meas = run_ngspice(text + "\n", timeout_s=30.0)
    # reference: ngspice's level-1 diode with the generated models
    assert meas["va"] == pytest.approx(float(z.breakdown_voltage(2e-3)), abs=2e-5)
    assert meas["vb"] == pytest.approx(float(z.forward_drop(3e-3)), abs=2e-5)
    assert meas["vc"] == pytest.approx(float(s.forward_drop(0.3e-3)), abs=2e-5)
