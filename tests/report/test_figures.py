"""The workbench's figures (``tristock.report.figures``) and the Monte Carlo draws they plot
(``analysis.montecarlo.monte_carlo_samples``)."""

from __future__ import annotations

import numpy as np
import pytest

from tristock.analysis.montecarlo import monte_carlo, monte_carlo_samples
from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import Design
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.export.designfile import design_for
from tristock.report.figures import histograms_svg, rising_edge, time_unit, waveform_svg
from tristock.spec.loading import load_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog


@pytest.fixture(scope="module")
def board() -> tuple[Spec, Design]:
    spec = load_spec(example_spec_path("demo"))
    topology = next(iter(TOPOLOGIES.values()))
    catalog = load_catalog(demo_catalog_dir())
    return spec, design_for(spec, dict(topology.demo_board), catalog)


def test_time_unit_reads_the_span_below_1000() -> None:
    assert time_unit(2e-3) == (1e3, "ms")
    assert time_unit(400e-6) == (1e6, "µs")
    assert time_unit(5e-9) == (1e9, "ns")
    assert time_unit(2500.0) == (1.0, "s")


def test_rising_edge_of_a_ramped_step() -> None:
    """A square from -5 V to +5 V ramping linearly over 1..2 s (common practice: the edge runs
    from the last sample at the low level to the first at the high one)."""
    t = np.linspace(0.0, 3.0, 301)
    square = np.clip(-5.0 + 10.0 * (t - 1.0), -5.0, 5.0)
    edge = rising_edge(t, square, 0.0)
    assert edge is not None
    assert edge[0] == pytest.approx(1.01, abs=0.011) and edge[1] == pytest.approx(1.99, abs=0.011)
    assert rising_edge(t, -square, 10.0) is None  # never crosses


def test_the_plotted_draws_are_the_yields_draws(board: tuple[Spec, Design]) -> None:
    """Same seed, same boards: the samples inside both bands are monte_carlo's count, and the
    median is its p50 (monte_carlo itself is checked against scipy.stats in tests/analysis)."""
    spec, design = board
    values = monte_carlo_samples(design, spec, samples=3000, seed=11)
    result = monte_carlo(design, spec, samples=3000, seed=11)
    f, a = values[:, 0], values[:, 1]
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    inside = (abs(f / ft - 1) <= tf) & (abs(a / at - 1) <= ta)
    assert int(np.count_nonzero(inside)) == result.passed
    assert float(np.percentile(f, 50)) == pytest.approx(result.spread["frequency_hz"]["p50"])


def test_svgs_are_labelled_and_carry_units(board: tuple[Spec, Design]) -> None:
    spec, design = board
    wave = waveform_svg(spec, design)
    assert wave.startswith('<svg role="img" aria-label=') and "voltage to ground (V)" in wave
    assert "zoom: rising edge of the square" in wave
    hist = histograms_svg(spec, design, samples=1000, seed=2)
    result = monte_carlo(design, spec, samples=1000, seed=2)
    assert f"yield {100 * result.fraction:.2f} %" in hist
    assert "frequency (Hz)" in hist and "triangle amplitude (Vpp)" in hist
