"""How analysis.montecarlo draws and counts: the deviations are the documented draws (one
``Generator.random`` call per variable, in order, through the inverse normal CDF), batches
and sorting change no figure, and ``yield_count`` answers as a count one chunk at a time.

References: scipy.stats.truncnorm for the truncated normal; numpy's own percentile and a
plain loop over chunks for the counts (common practice). Parts are invented test rows
(stock codes RT-/CT-/UT-) with a finite-GBW op amp, so every sample goes through the
comparator-edge table."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from tristock.analysis import montecarlo
from tristock.analysis.montecarlo import (
    NORMAL_SIGMAS,
    deviations,
    monte_carlo,
    monte_carlo_samples,
    yield_count,
)
from tristock.analysis.spread import evaluate, metric_columns, spread_board
from tristock.circuits.board import Design
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, OpAmp, Resistor

FloatArray = np.ndarray


def resistor(code: str, value: float) -> Resistor:
    return Resistor(code, value, 1.0, 100.0, "E96", 0.25, "0603", 0.01, 1000)


DESIGN = Design(
    OpAmp(
        "UT-2",
        2,
        3.0,
        40.0,
        swing_pos_v=1.2,
        swing_neg_v=1.0,
        slew_v_per_us=10.0,
        gbw_hz=5e6,
        delay_s=200e-9,
        offset_v=2e-3,
        bias_a=100e-9,
        output_a=0.02,
        unit_cost=0.5,
        stock=100,
    ),
    resistor("RT-1", 10e3),
    resistor("RT-2", 20e3),
    resistor("RT-3", 10e3),
    Capacitor("CT-1", 10e-9, "C0G", 5.0, 30.0, None, 50.0, "0805", 0.05, 1000),
)


def make_spec(f_tol: float = 2.0) -> Spec:
    return parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
            "frequency": {"target_hz": 4850.0, "tolerance_pct": f_tol},
            "triangle": {"amplitude_vpp": 10.5, "tolerance_pct": 5.0},
            "environment": {"temp_min_c": -40.0, "temp_max_c": 85.0},
        }
    )


SPEC = make_spec()


@pytest.mark.parametrize("distribution", ["normal", "uniform"])
def test_deviations_are_one_draw_per_variable_in_order(distribution: str) -> None:
    _, variables = spread_board(DESIGN, SPEC)
    got = deviations(np.random.default_rng(4), variables, 3000, distribution)
    rng = np.random.default_rng(4)
    edge = float(special.ndtr(-NORMAL_SIGMAS))
    for i, var in enumerate(variables):
        u = rng.random(3000)
        if var.temperature is not None or distribution == "uniform":
            want = 2.0 * u - 1.0
        else:
            want = special.ndtri(edge + u * (1.0 - 2.0 * edge)) / NORMAL_SIGMAS
            # scipy.stats.truncnorm: the same quantiles of the normal truncated at ±3σ
            law = stats.truncnorm(-NORMAL_SIGMAS, NORMAL_SIGMAS, scale=1.0 / NORMAL_SIGMAS)
            assert np.allclose(want, law.ppf(u), rtol=0.0, atol=1e-9)
            # scipy.special's ndtri: our AS 241 quantile agrees to rounding (tests/test_special.py)
            assert np.allclose(got[:, i], want, rtol=0.0, atol=2e-15)
            continue
        assert np.array_equal(got[:, i], want)
    assert got.shape == (3000, len(variables))


def test_batches_give_the_same_values_as_one_evaluation() -> None:
    board, variables = spread_board(DESIGN, SPEC)
    z = deviations(np.random.default_rng(1), variables, 1000, "normal")
    whole = evaluate(board, variables, np.ascontiguousarray(z))
    assert np.array_equal(metric_columns(board, variables, z, batch=77), whole.T)
    assert np.array_equal(monte_carlo_samples(DESIGN, SPEC, samples=1000, seed=1), whole)


def test_spread_is_numpys_percentile_of_the_samples() -> None:
    values = monte_carlo_samples(DESIGN, SPEC, samples=5000, seed=9)
    result = monte_carlo(DESIGN, SPEC, samples=5000, seed=9)
    p1, p50, p99 = np.percentile(values, [1, 50, 99], axis=0)
    for m, metric in enumerate(("frequency_hz", "amplitude_vpp", "duty_high")):
        assert result.spread[metric] == {
            "min": float(np.min(values[:, m])),
            "p1": float(p1[m]),
            "p50": float(p50[m]),
            "p99": float(p99[m]),
            "max": float(np.max(values[:, m])),
        }


def chunk_by_chunk(failing: FloatArray, max_failures: int | None, chunk: int) -> tuple[int, bool]:
    """The count ``yield_count`` documents, one chunk at a time."""
    samples, failed = failing.size, 0
    for start in range(0, samples, chunk):
        failed += int(np.count_nonzero(failing[start : start + chunk]))
        if max_failures is not None and failed > max_failures:
            return samples - failed, start + chunk >= samples
    return samples - failed, True


def failing_samples(spec: Spec, samples: int, seed: int) -> FloatArray:
    f, amp, _ = monte_carlo_samples(DESIGN, spec, samples=samples, seed=seed).T
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    inside = (f >= ft * (1 - tf)) & (f <= ft * (1 + tf))
    inside &= (amp >= at * (1 - ta)) & (amp <= at * (1 + ta))
    return np.asarray(~inside)


@pytest.mark.parametrize("f_tol", [0.3, 2.0])
@pytest.mark.parametrize("chunk", [100, 500, 777])
def test_yield_count_counts_as_one_chunk_at_a_time(f_tol: float, chunk: int) -> None:
    spec = make_spec(f_tol)
    failing = failing_samples(spec, 5003, 2)
    assert 0 < np.count_nonzero(failing) < failing.size
    for max_failures in (None, 0, 3, 40, 300, 5003):
        want = chunk_by_chunk(failing, max_failures, chunk)
        got = yield_count(
            DESIGN, spec, samples=5003, seed=2, max_failures=max_failures, chunk=chunk
        )
        assert got == want
    assert monte_carlo(DESIGN, spec, samples=5003, seed=2).passed == want[0]


def test_yield_count_stops_where_one_chunk_at_a_time_stops(monkeypatch: pytest.MonkeyPatch) -> None:
    # A model that refuses one sample (row 2400, in the fifth chunk of 500): a count that
    # stops in the fourth chunk never meets it, though the batch of chunks 4-7 holds it; a
    # count that must reach it fails there.
    spec = make_spec(2.0)
    _, variables = spread_board(DESIGN, spec)
    refused = deviations(np.random.default_rng(2), variables, 4000, "normal")[2400]
    real = metric_columns
    seen: list[int] = []

    def refusing(board: object, variables: object, z: FloatArray) -> FloatArray:
        seen.append(z.shape[0])
        if np.any(np.all(z == refused, axis=1)):
            raise ValueError("vos1: the test's refused sample")
        return real(board, variables, z)  # type: ignore[arg-type]

    failing = failing_samples(spec, 4000, 2)
    monkeypatch.setattr(montecarlo, "metric_columns", refusing)
    allowed = int(np.count_nonzero(failing[:1500]))
    assert np.count_nonzero(failing[1500:2000]) > 0
    want = chunk_by_chunk(failing, allowed, 500)
    assert want == (4000 - int(np.count_nonzero(failing[:2000])), False)
    assert yield_count(DESIGN, spec, samples=4000, seed=2, max_failures=allowed) == want
    assert seen == [500, 1000, 2000, 500]  # the refused batch, then its first chunk alone
    with pytest.raises(ValueError, match="refused"):
        yield_count(DESIGN, spec, samples=4000, seed=2)


@pytest.mark.parametrize("chunk", [0, -5, 2.5, True])
def test_yield_count_rejects_a_bad_chunk(chunk: object) -> None:
    with pytest.raises(ValueError, match="chunk"):
        yield_count(DESIGN, SPEC, samples=100, chunk=chunk)  # type: ignore[arg-type]
