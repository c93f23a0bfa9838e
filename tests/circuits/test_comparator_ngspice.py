"""The comparator-IC loop's model (``circuits.comparator_schmitt``) against ngspice.

Each case is a board of the bundled demo stock room; its netlist is generated from those parts
(``COMPARATOR_SCHMITT.netlist``: U1 the op-amp gm-stage macromodel, U2 a behavioural
comparator with its catalogued delay and linear rise/fall, R5 and its load as they are) and
run in ngspice (batch, transient). The reference for every check is that ngspice run. Limits
(issue 13): 0.3 % in frequency and triangle amplitude, 0.5 points of duty; the open-drain
cases also check the square's sagging high level. With CI set, a missing ngspice fails.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import pytest

from ngspice_harness import require_ngspice, run_ngspice
from tristock.circuits.board import resolve
from tristock.circuits.comparator_schmitt import COMPARATOR_SCHMITT, ComparatorOscillator
from tristock.circuits.comparator_schmitt.netlist import MEASURES
from tristock.circuits.rails import Rails
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import load_catalog

#: name -> (designator -> demo stock code, rails)
CASES: dict[str, tuple[dict[str, str], tuple[float, float]]] = {
    # push-pull, low frequency (about 1 kHz): micropower U2, its 4 µs delay
    "push_pull_low": (
        {"U1": "GA-RRC2", "U2": "GC-MP1", "R1": "R1F-10K0", "R2": "R1F-20K0",
         "R3": "R1F-100K", "C1": "CC0-4N70"},
        (5.0, 0.0),
    ),
    # push-pull, high frequency (about 220 kHz): fast U2, U1's 20 MHz GBW counts
    "push_pull_high": (
        {"U1": "GA-RRC2F", "U2": "GC-PP1F", "R1": "R1F-10K0", "R2": "R1F-20K0",
         "R3": "R1F-4K75", "C1": "CC0-470P"},
        (5.0, 0.0),
    ),
    # open-drain, low frequency (about 1.2 kHz) on ±12 V: R5's level sags under R3 and R1 + R2
    "open_drain_low": (
        {"U1": "GA-JF2", "U2": "GC-OD2", "R1": "R1F-10K0", "R2": "R5J-22K0",
         "R3": "R1F-47K5", "C1": "CC0-10N0", "R5": "R5J-4K70"},
        (12.0, -12.0),
    ),
    # open-drain, high frequency (about 75 kHz): the 0.4 µs delay and unequal edges (0.2 µs
    # rise, 0.06 µs fall) take several % of the period and move the duty
    "open_drain_high": (
        {"U1": "GA-RRC2F", "U2": "GC-OD2", "R1": "R1F-10K0", "R2": "R1F-15K0",
         "R3": "R1F-4K75", "C1": "CC0-1N00", "R5": "R5J-2K20"},
        (5.0, 0.0),
    ),
}  # fmt: skip

FREQUENCY_LIMIT = 3e-3
AMPLITUDE_LIMIT = 3e-3
DUTY_LIMIT = 5e-3


def oscillator(name: str) -> ComparatorOscillator:
    ids, rails = CASES[name]
    design = resolve(ids, load_catalog(demo_catalog_dir()))
    return COMPARATOR_SCHMITT.oscillator(design, Rails(*rails))


@pytest.fixture(scope="module")
def runs() -> dict[str, dict[str, float]]:
    require_ngspice()

    def one(name: str) -> dict[str, float]:
        text = COMPARATOR_SCHMITT.netlist(oscillator(name), periods=3)
        return run_ngspice(text, timeout_s=240.0)

    with ThreadPoolExecutor(max_workers=2) as pool:
        return dict(zip(CASES, pool.map(one, CASES), strict=True))


@pytest.mark.ngspice
@pytest.mark.parametrize("name", list(CASES))
def test_model_agrees_with_ngspice(name: str, runs: dict[str, dict[str, float]]) -> None:
    osc = oscillator(name)
    p = osc.prediction()
    meas = runs[name]
    assert set(MEASURES) <= set(meas)
    frequency = 1.0 / meas["per"]
    amplitude = meas["vtmax"] - meas["vtmin"]
    # reference: ngspice transient run of the board's own netlist
    assert frequency / float(p.frequency_hz) - 1.0 == pytest.approx(0.0, abs=FREQUENCY_LIMIT)
    # reference: ngspice (triangle peak to peak)
    assert amplitude / float(p.amplitude_vpp) - 1.0 == pytest.approx(0.0, abs=AMPLITUDE_LIMIT)
    # reference: ngspice (share of the period above the square's mid level)
    assert meas["duty"] == pytest.approx(float(p.duty_high), abs=DUTY_LIMIT)
    # reference: ngspice (the triangle's midpoint, V from the reference)
    ref = osc.rails.reference_v
    midpoint = (meas["vtmax"] + meas["vtmin"]) / 2.0 - ref
    assert midpoint == pytest.approx(float(p.offset_v), abs=AMPLITUDE_LIMIT * amplitude)


@pytest.mark.ngspice
@pytest.mark.parametrize("name", [n for n in CASES if n.startswith("open_drain")])
def test_open_drain_level_sags_as_predicted(name: str, runs: dict[str, dict[str, float]]) -> None:
    """The square's highest point comes with the triangle at its top: vs0 + γ·peak_hi
    (``physics.high_level``), well below V+."""
    osc = oscillator(name)
    p = osc.prediction()
    r12 = osc.r1 + osc.r2
    gamma = osc.r5 / r12 / (1.0 + osc.r5 / r12 + osc.r5 / osc.r3)
    mid_triangle = (float(p.threshold_high_v) + float(p.threshold_low_v)) / 2.0
    highest = float(p.square_high_v) + gamma * (float(p.peak_high_v) - mid_triangle)
    ref = osc.rails.reference_v
    sag = osc.rails.v_pos - ref - highest
    assert sag > 0.05 * (osc.rails.v_pos - ref)  # the load costs more than 5 % of the swing
    # reference: ngspice (the square node's maximum)
    assert runs[name]["vsmax"] - ref == pytest.approx(highest, rel=AMPLITUDE_LIMIT)


def test_model_figures_of_the_cases() -> None:
    """Print-free sanity of the cases themselves: the frequencies they are named for, and
    where delay and edges matter (a share of the period above 2 %)."""
    assert 0.8e3 < oscillator("push_pull_low").frequency_hz < 1.3e3
    assert 150e3 < oscillator("push_pull_high").frequency_hz < 300e3
    assert 0.9e3 < oscillator("open_drain_low").frequency_hz < 1.5e3
    fast = oscillator("open_drain_high")
    assert 50e3 < fast.frequency_hz < 100e3
    assert float(fast.prediction().timing_share) > 0.02
