"""The time-domain simulation with finite gain-bandwidth in both op amps (the ODE path of
tristock.simulate) and the simulation report's headline against the full model.

References: the exact piecewise path of the same module (the ODE path must reduce to it as the
GBW grows; it shares no code with it but the loop's parameters), the closed-form model
(tristock.circuits, whose finite-GBW terms were derived separately and are checked against
ngspice in test_circuit_ngspice.py; the simulation's own ngspice checks are in
test_simulate_ngspice.py), and hand-derived limits named beside each check.
"""

from __future__ import annotations

import dataclasses
import json
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

from tristock import cli
from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.report.board import headline_difference, simulation_report_of
from tristock.simulate import SimulationError, simulate

REPO = Path(__file__).resolve().parents[2]
DEMO_DIR = REPO / "catalogs" / "demo"
inf = math.inf


def _amp(swing: tuple[float, float], slew: float, delay: float, gbw: float, **kw: float):
    return OpAmpModel(swing[0], swing[1], slew, slew, delay, gbw, **kw)


DESIGNS = {
    # the demo's rank 1 (GA-JF2: 3 MHz, 13 V/µs, 1.2 µs, 3 mV offsets)
    "demo_rank1": Oscillator(
        10.7e3,
        38.3e3,
        51.1e3,
        6.8e-9,
        _amp((1.5, 1.5), 13e6, 1.2e-6, 3e6, offset_v=3e-3, bias_a=3e-11, comparator_offset_v=3e-3),
        Rails(12.0, -12.0),
    ),
    # 1 MHz, 2 V/µs on ±5 V near 20 kHz: op-amp timing is 22 % of the period
    "gbw_1M_20k": Oscillator(
        10e3, 22e3, 4.7e3, 4.7e-9, _amp((1.0, 1.0), 2e6, 0.0, 1e6), Rails(5, -5)
    ),
    # single supply with its own reference, offsets and bias in both channels
    "gbw_asymmetric": Oscillator(
        8.2e3,
        22e3,
        15e3,
        6.8e-9,
        _amp((0.3, 0.3), 4e6, 0.5e-6, 2e6, offset_v=2e-3, bias_a=50e-9, comparator_bias_a=50e-9),
        Rails(10.0, 0.0, v_ref=4.0),
    ),
}


@pytest.fixture(scope="module")
def simulated() -> dict[str, object]:
    return {name: simulate(osc, periods=4) for name, osc in DESIGNS.items()}


@pytest.mark.parametrize("name", sorted(DESIGNS))
def test_finite_gbw_simulation_agrees_with_the_model(name: str, simulated) -> None:
    """The model holds the triangle's slope constant through each edge; at a 22 % timing share
    that costs about 4.5e-4 (measured against this simulation and ngspice alike), so 1e-3."""
    m = simulated[name].measured
    p = DESIGNS[name].prediction()
    assert m.frequency_hz == pytest.approx(float(p.frequency_hz), rel=1e-3)
    assert m.amplitude_vpp == pytest.approx(float(p.amplitude_vpp), rel=1e-3)
    assert m.duty_high == pytest.approx(float(p.duty_high), abs=1e-4)
    assert m.offset_v == pytest.approx(float(p.offset_v), abs=1e-3)
    # and the GBW terms are what it agrees with: without them the model is off by more
    plain = dataclasses.replace(
        DESIGNS[name], opamp=dataclasses.replace(DESIGNS[name].opamp, gbw_hz=inf)
    )
    assert abs(m.frequency_hz / plain.frequency_hz - 1) > 5 * abs(
        m.frequency_hz / float(p.frequency_hz) - 1
    )


def test_gbw_path_tends_to_the_exact_path() -> None:
    # a 10 GHz GBW leaves a build-up of about a nanosecond per edge (the triangle alone drives
    # the tanh stage's 0.16 mV linear range) and an integrator error ε ~ 2e-7: the ODE path
    # lands within 4e-5 of the piecewise result, and on the model's account of that residue
    amp = _amp((1.5, 1.5), 10e6, 1e-6, inf)
    exact = simulate(Oscillator(10e3, 27e3, 10e3, 10e-9, amp, Rails(12.0, -12.0)), periods=3)
    wide = Oscillator(
        10e3, 27e3, 10e3, 10e-9, dataclasses.replace(amp, gbw_hz=1e10), Rails(12, -12)
    )
    ode = simulate(wide, periods=3)
    assert ode.measured.frequency_hz == pytest.approx(exact.measured.frequency_hz, rel=5e-5)
    assert ode.measured.amplitude_vpp == pytest.approx(exact.measured.amplitude_vpp, rel=5e-5)
    assert ode.measured.duty_high == pytest.approx(exact.measured.duty_high, abs=1e-5)
    assert ode.measured.frequency_hz == pytest.approx(wide.frequency_hz, rel=1e-6)


def test_waveform_samples(simulated) -> None:
    result = simulated["demo_rank1"]
    m = result.measured
    assert result.t_s.size == 4000 and np.all(np.diff(result.t_s) > 0)
    assert result.t_s[-1] == pytest.approx(4 / m.frequency_hz, rel=1e-9)
    # the square sits at its levels between edges; samples never pass the measured peaks
    assert np.max(result.square_v) == pytest.approx(m.square_high_v + result.reference_v)
    tri = result.triangle_v - result.reference_v
    assert np.max(tri) <= m.peak_high_v + 1e-9 and np.min(tri) >= m.peak_low_v - 1e-9
    json.dumps(result.to_dict())


def test_thresholds_beyond_the_swing_raise_on_the_gbw_path() -> None:
    # k = 1.5: the comparator needs the triangle at ∓16.5 V, the integrator stops at ∓11 V
    osc = Oscillator(15e3, 10e3, 10e3, 10e-9, _amp((1.0, 1.0), 5e6, 0.0, 2e6), Rails(12, -12))
    with pytest.raises(SimulationError, match="swing limit"):
        simulate(osc)


def test_transitions_that_never_reach_mid_swing_raise_on_the_gbw_path() -> None:
    # the piecewise path's broken loop (k = 0.05, levels +4/-17 V, slow comparator), now with
    # a 1 MHz GBW: its edges turn back before mid-swing (-6.5 V) as well
    osc = Oscillator(150.0, 3e3, 3e3, 15e-9, _amp((1.0, 1.0), 0.3e6, 0.0, 1e6), Rails(5, -18))
    with pytest.raises(SimulationError, match="turned back") as info:
        simulate(osc)
    assert "mid-swing level -6.5 V" in str(info.value)


# --- the headline: simulation against the full model ------------------------------------------


def test_headline_compares_with_the_full_model(simulated) -> None:
    """Fails if the headline compared the simulation with a model that leaves out what the
    simulation leaves out: at 1 MHz the GBW terms move the frequency by several percent."""
    osc = DESIGNS["gbw_1M_20k"]
    result = simulated["gbw_1M_20k"]
    full = osc.prediction()
    data = simulation_report_of(result, full)
    m = result.measured
    assert data["predicted"]["frequency_hz"] == float(full.frequency_hz)
    assert data["difference"]["frequency_rel"] == m.frequency_hz / float(full.frequency_hz) - 1
    assert data["difference"] == headline_difference(m, full)
    no_gbw = dataclasses.replace(osc, opamp=dataclasses.replace(osc.opamp, gbw_hz=inf))
    wrong = m.frequency_hz / no_gbw.frequency_hz - 1
    assert abs(wrong) > 0.05 > 50 * abs(data["difference"]["frequency_rel"])


def _demo_design(tmp_path: Path) -> Path:
    path = tmp_path / "demo_rank1.json"
    spec = (REPO / "src" / "tristock" / "examples" / "demo.toml").read_text()

    parts = {
        "U1": "GA-JF2",
        "R1": "R1F-10K7",
        "R2": "R0B-38K3",
        "R3": "R1F-51K1",
        "C1": "CPPG-6N80",
    }
    path.write_text(json.dumps({"spec": tomllib.loads(spec), "parts": parts}))
    return path


def test_cli_headline_is_the_full_model(tmp_path: Path, capsys) -> None:
    """`tristock simulate` on the demo's rank 1: the JSON and the table compare the simulation
    with the prediction `tristock analyse` reports, not with a model without GBW."""
    path = _demo_design(tmp_path)
    argv = [str(path), "--catalog", str(DEMO_DIR)]
    assert cli.main(["analyse", *argv, "--json", "--samples", "200"]) == 0
    analysed = json.loads(capsys.readouterr().out)["predicted"]["frequency_hz"]
    assert cli.main(["simulate", *argv, "--json", "--periods", "3"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert sim["predicted"]["frequency_hz"] == pytest.approx(analysed, rel=1e-12)
    measured = sim["measured"]["frequency_hz"]
    assert sim["difference"]["frequency_rel"] == pytest.approx(measured / analysed - 1, abs=1e-15)
    assert abs(sim["difference"]["frequency_rel"]) < 2e-4
    assert cli.main(["simulate", *argv, "--periods", "3"]) == 0
    table = capsys.readouterr().out
    row = next(line for line in table.splitlines() if line.strip().startswith("frequency"))
    shown = float(re.findall(r"([+-]\d+\.\d+) %", row)[0])
    assert shown == pytest.approx(100 * (measured / analysed - 1), abs=1e-4)
