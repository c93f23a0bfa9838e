"""The comparator-IC loop's closed form (``circuits.comparator_schmitt``): its limits against
textbook results, its vectorisation, its time-domain loop and its checks. The full model is
checked against ngspice in test_comparator_ngspice.py."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tristock.circuits.board import resolve
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT
from tristock.circuits.comparator_schmitt.physics import high_level, predict
from tristock.circuits.rails import Rails
from tristock.examples import demo_catalog_dir
from tristock.simulate import simulate
from tristock.stock.catalog import Catalog, load_catalog

OPEN_DRAIN = {"U1": "GA-RRC2F", "U2": "GC-OD2", "R1": "R1F-10K0", "R2": "R1F-15K0",
              "R3": "R1F-4K75", "C1": "CC0-1N00", "R5": "R5J-2K20"}  # fmt: skip


@pytest.fixture(scope="module")
def demo() -> Catalog:
    return load_catalog(demo_catalog_dir())


def test_ideal_push_pull_is_the_textbook_oscillator() -> None:
    # f = R2/(4·R1·R3·C1) with equal levels and instant switching (Sedra & Smith, from memory)
    p = predict(10e3, 27e3, 10e3, 10e-9, 11.0, 11.0)
    assert float(p.frequency_hz) == pytest.approx(27e3 / (4 * 10e3 * 10e3 * 10e-9), rel=1e-12)
    assert float(p.duty_high) == pytest.approx(0.5, abs=1e-12)
    assert float(p.amplitude_vpp) == pytest.approx(2 * 11.0 * 10 / 27, rel=1e-12)
    # asymmetric levels: T = R3·C1·k·(VH + VL)²/(VH·VL), high VL/(VH + VL) (DESIGN.md)
    p = predict(10e3, 27e3, 10e3, 10e-9, 11.0, 10.0)
    t0 = 10e3 * 10e-9 * (10 / 27) * 21.0**2 / 110.0
    assert float(p.period_s) == pytest.approx(t0, rel=1e-12)
    assert float(p.duty_high) == pytest.approx(10 / 21, rel=1e-12)


def test_a_linear_edge_acts_like_a_switch_at_its_half_way_point() -> None:
    # symmetric: T = T0 + 4·d with d the 50 % delay (DESIGN.md, td + τ/2 for a linear slew)
    base = predict(10e3, 27e3, 10e3, 10e-9, 11.0, 11.0)
    late = predict(10e3, 27e3, 10e3, 10e-9, 11.0, 11.0, delay=1e-6, rise=0.4e-6, fall=0.4e-6)
    assert float(late.period_s) - float(base.period_s) == pytest.approx(4e-6, rel=1e-9)


def test_open_drain_level_is_the_square_nodes_kcl() -> None:
    # KCL at the square node: (Hs - vs)/Rs + (vt - vs)/R12 + (0 - vs)/R3 = 0 (Ohm's law)
    r1, r2, r3, rs, hs, vt = 10e3, 22e3, 47e3, 4.7e3, 12.0, 3.0
    vs0, gamma = high_level(r1, r2, r3, hs, rs)
    vs = float(vs0 + gamma * vt)
    assert (hs - vs) / rs + (vt - vs) / (r1 + r2) - vs / r3 == pytest.approx(0.0, abs=1e-15)
    assert high_level(r1, r2, r3, hs, 0.0) == (pytest.approx(hs), pytest.approx(0.0))


def test_vectorised_predict_matches_scalar_calls(demo: Catalog) -> None:
    osc = COMPARATOR_SCHMITT.oscillator(resolve(OPEN_DRAIN, demo), Rails(5.0, 0.0))
    point = osc.point
    r3s = np.array([3e3, 4.75e3, 8e3])
    many = COMPARATOR_SCHMITT.predict(dataclasses.replace(point, r3=r3s), None)
    for i, r3 in enumerate(r3s):
        one = COMPARATOR_SCHMITT.predict(dataclasses.replace(point, r3=float(r3)), None)
        assert many.frequency_hz[i] == pytest.approx(one.frequency_hz, rel=1e-12)  # type: ignore[index]
        assert many.duty_high[i] == pytest.approx(one.duty_high, rel=1e-12)  # type: ignore[index]


def test_the_oscillator_prints_itself(demo: Catalog) -> None:
    osc = COMPARATOR_SCHMITT.oscillator(resolve(OPEN_DRAIN, demo), Rails(5.0, 0.0))
    text = str(osc)
    assert "GC-OD2 (open-drain, R5 2.2 kΩ pull-up)" in text and "kHz" in text


def test_unequal_edges_are_refused_by_the_piecewise_engine(demo: Catalog) -> None:
    osc = COMPARATOR_SCHMITT.oscillator(resolve(OPEN_DRAIN, demo), Rails(5.0, 0.0))
    with pytest.raises(ValueError, match="rise_s and fall_s differ"):
        simulate(osc, topology=COMPARATOR_SCHMITT)


def test_checks_flag_a_heavy_pull_up_and_the_wrong_supply(demo: Catalog) -> None:
    rails = Rails(5.0, 0.0)
    ok = {w.code for w in COMPARATOR_SCHMITT.check(resolve(OPEN_DRAIN, demo), rails)}
    assert "load_comparator" not in ok and "resistor_power" not in ok
    # 100 Ω from 5 V: 47.5 mA through R5 with U2 low, over its 6 mA and R5's 0.125 W (Ohm's law)
    heavy = {**OPEN_DRAIN, "R5": "R5J-100R"}
    found = {w.code: w.severity for w in COMPARATOR_SCHMITT.check(resolve(heavy, demo), rails)}
    assert found["load_comparator"] == "error" and found["resistor_power"] == "error"
    # GC-PP1F is rated 2.7-5.5 V: a ±12 V board is outside it
    fast = {**OPEN_DRAIN, "U1": "GA-JF2", "U2": "GC-PP1F"}
    fast.pop("R5")
    found = {
        w.code: w.severity
        for w in COMPARATOR_SCHMITT.check(resolve(fast, demo), Rails(12.0, -12.0))
    }
    assert found["supply_range"] == "error"
