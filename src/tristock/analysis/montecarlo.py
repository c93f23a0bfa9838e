"""Monte Carlo yield of one design: samples of the spread box its topology declares
(``spread``), each variable "normal" (truncated at ``NORMAL_SIGMAS``) or "uniform", the
temperature uniform, counted against the spec's bands, with a Wilson score interval."""

from __future__ import annotations

import math
from collections.abc import Hashable, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

from tristock.analysis.memo import Memo, box_key
from tristock.analysis.spread import (
    BATCH_ROWS,
    METRICS,
    Board,
    SpreadVariable,
    check_inputs,
    joint_metric_columns,
    metric_columns,
    spread_board,
)
from tristock.circuits.board import AnyBoard
from tristock.spec.model import Spec
from tristock.special import normal_quantile

FloatArray = npt.NDArray[np.float64]
Distribution = Literal["normal", "uniform"]

#: A "normal" tolerance is this many standard deviations, and the normal is truncated there.
NORMAL_SIGMAS = 3.0
#: Confidence level of the yield interval.
CONFIDENCE = 0.95


@dataclass(frozen=True)
class YieldResult:
    """Monte Carlo yield: the share of boards with f inside the spec's frequency band AND the
    triangle amplitude inside its band (AND, for a set duty, the duty inside its band).

    ``confidence_interval`` is the Wilson score interval at ``confidence``:
    (p + z²/2n ± z·sqrt(p(1 - p)/n + z²/4n²))/(1 + z²/n), z the normal quantile.
    ``spread`` maps frequency_hz, amplitude_vpp and duty_high to their min, p1, p50, p99, max.
    """

    fraction: float
    passed: int
    samples: int
    confidence: float
    confidence_interval: tuple[float, float]
    seed: int
    distribution: str
    spread: dict[str, dict[str, float]]

    def to_dict(self) -> dict[str, Any]:
        return {
            "fraction": self.fraction,
            "passed": self.passed,
            "samples": self.samples,
            "confidence": self.confidence,
            "confidence_interval": list(self.confidence_interval),
            "seed": self.seed,
            "distribution": self.distribution,
            "spread": {k: dict(v) for k, v in self.spread.items()},
        }


def wilson_interval(
    passed: int, samples: int, confidence: float = CONFIDENCE
) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion passed/samples (see YieldResult)."""
    if samples < 1:
        raise ValueError(f"samples: must be >= 1, got {samples}")
    if not 0 <= passed <= samples:
        raise ValueError(f"passed: must be between 0 and samples ({samples}), got {passed}")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence: must be between 0 and 1, got {confidence}")
    z = float(normal_quantile(np.array(0.5 + confidence / 2)))
    p = passed / samples
    denom = 1 + z * z / samples
    centre = (p + z * z / (2 * samples)) / denom
    half = z * math.sqrt(p * (1 - p) / samples + z * z / (4 * samples * samples)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


def deviations(
    rng: np.random.Generator, variables: list[SpreadVariable], samples: int, distribution: str
) -> FloatArray:
    """(samples, n) deviations: temperature uniform over [-1, 1]; the rest uniform over
    [-1, 1] or normal with σ = 1/NORMAL_SIGMAS truncated at ±1 (inverse-CDF sampling).

    The uniform numbers are drawn in one call, variable after variable (row i of an (n,
    samples) draw holds what the i-th of n draws of ``samples`` would); the result is that
    array transposed, so that each variable's column is contiguous."""
    z = rng.random((len(variables), samples))
    edge = 0.5 * math.erfc(NORMAL_SIGMAS / math.sqrt(2.0))  # Φ(-NORMAL_SIGMAS)
    for i, var in enumerate(variables):
        row = z[i]
        if var.temperature is not None or distribution == "uniform":
            row *= 2.0
            row -= 1.0
        else:
            row *= 1.0 - 2.0 * edge
            row += edge
            normal_quantile(row, out=row)
            row /= NORMAL_SIGMAS
    return z.T


def _in_bands(vals: FloatArray, spec: Spec) -> npt.NDArray[np.bool_]:
    """Which boards (columns of ``vals``: f, amplitude, duty) have f inside the spec's
    frequency band, the amplitude inside its, and the duty inside a set duty's band."""
    f, amp = vals[0], vals[1]
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    ok = (f >= ft * (1 - tf)) & (f <= ft * (1 + tf)) & (amp >= at * (1 - ta))
    ok &= amp <= at * (1 + ta)
    duty = spec.circuit.duty_band
    if duty is not None:
        ok &= (vals[2] >= duty[0]) & (vals[2] <= duty[1])
    return np.asarray(ok, dtype=bool)


def _percentiles(values: FloatArray) -> dict[str, dict[str, float]]:
    """min, p1, p50, p99 and max of each row of ``values`` (3, samples), keyed by METRICS
    (``np.percentile``'s linear interpolation). The rows are sorted first: numpy's sort is
    several times faster than the selection ``np.percentile`` makes on unsorted rows, and
    the percentiles of a row do not depend on its order."""
    ordered = np.sort(values, axis=1)
    p1, p50, p99 = np.percentile(ordered, [1, 50, 99], axis=1)
    high = ordered[:, -1]
    low = np.where(np.isnan(high), high, ordered[:, 0])  # NaN sorts last; np.min gives NaN
    return {
        metric: {
            "min": float(low[m]),
            "p1": float(p1[m]),
            "p50": float(p50[m]),
            "p99": float(p99[m]),
            "max": float(high[m]),
        }
        for m, metric in enumerate(METRICS)
    }


def monte_carlo(
    design: AnyBoard,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> YieldResult:
    """Monte Carlo yield over the spread variables the design's topology declares.

    ``distribution="normal"`` (default): each ± bound is 3σ of a normal truncated at the
    bound (tolerances, class II band, rails, offsets, bias, slew, delay alike; an offset's σ
    is therefore the catalogued typical/3). ``"uniform"``: uniform over each ± bound.
    Temperature is uniform over the environment range in both. numpy Generator seeded with
    ``seed``; the same seed gives the same samples. The samples' metrics do not depend on the
    bands and are remembered for the process (``SAMPLED``).
    """
    (result,) = monte_carlo_many(
        [design], spec, samples=samples, seed=seed, distribution=distribution
    )
    return result


def monte_carlo_many(
    designs: Sequence[AnyBoard],
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> list[YieldResult]:
    """``monte_carlo`` of each design. Boards not remembered are sampled together: boards of
    one topology, wiring and variable list draw the same deviations (the same seed) and share
    the model's calls (``spread.joint_metric_columns``), so each gets the samples it gets
    alone, to the bit."""
    for design in designs:
        check_inputs(design, spec)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
        raise ValueError(f"samples: must be an integer >= 1, got {samples!r}")
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ValueError(f"seed: must be an integer >= 0, got {seed!r}")
    if distribution not in ("normal", "uniform"):
        raise ValueError(f"distribution: must be 'normal' or 'uniform', got {distribution!r}")
    keys = [box_key(design, spec, samples, seed, distribution) for design in designs]
    found = [SAMPLED.get(key) for key in keys]
    groups: dict[Hashable, list[tuple[int, Board, list[SpreadVariable]]]] = {}
    for n, known in enumerate(found):
        if known is None:
            board, variables = spread_board(designs[n], spec)
            kinds = tuple((v.name, v.temperature is not None) for v in variables)
            shared = (board.topology.name, board.v_ref, board.control, type(board.point), kinds)
            groups.setdefault(shared, []).append((n, board, variables))
    for members in groups.values():
        variables = members[0][2]
        z = deviations(np.random.default_rng(seed), variables, samples, distribution)
        columns = joint_metric_columns([(board, own) for _, board, own in members], z)
        for (n, _, _), vals in zip(members, columns, strict=True):
            entry = (vals, _percentiles(vals))
            found[n] = entry
            SAMPLED.put(keys[n], entry)
    return [_yield_of(spec, entry, seed, distribution) for entry in found if entry is not None]


def _yield_of(
    spec: Spec,
    entry: tuple[FloatArray, dict[str, dict[str, float]]],
    seed: int,
    distribution: str,
) -> YieldResult:
    """The yield of remembered samples under the spec's bands (the spread copied)."""
    vals, spread = entry
    samples = vals.shape[1]
    passed = int(np.count_nonzero(_in_bands(vals, spec)))
    return YieldResult(
        fraction=passed / samples,
        passed=passed,
        samples=samples,
        confidence=CONFIDENCE,
        confidence_interval=wilson_interval(passed, samples, CONFIDENCE),
        seed=seed,
        distribution=distribution,
        spread={metric: dict(figures) for metric, figures in spread.items()},
    )


#: The sampled boards of ``monte_carlo`` (metrics and their percentiles), by board, supply,
#: environment, samples, seed and distribution (``analysis.memo``): the bands only count them.
SAMPLED: Memo[tuple[FloatArray, dict[str, dict[str, float]]]] = Memo(
    max_items=1024, max_bytes=64 << 20, size=lambda entry: int(entry[0].nbytes)
)


def yield_count(
    design: AnyBoard,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
    max_failures: int | None = None,
    chunk: int = 500,
) -> tuple[int, bool]:
    """The samples of ``monte_carlo`` (same seed, same order) that land in both bands, taken a
    chunk at a time: (count, True) when every sample was evaluated, or, once more than
    ``max_failures`` have failed, (an upper bound on the count, False). The count equals
    ``monte_carlo(...).passed`` whenever it is exact.

    The chunks are evaluated in batches of 1, 2, 4, ... chunks (up to ``spread.BATCH_ROWS``
    rows) and counted chunk by chunk, so the answer is the same as one chunk at a time; a
    batch the model refuses is taken again chunk by chunk, to stop or fail where one chunk
    at a time would have."""
    check_inputs(design, spec)
    if isinstance(chunk, bool) or not isinstance(chunk, int) or chunk < 1:
        raise ValueError(f"chunk: must be an integer >= 1, got {chunk!r}")
    board, variables = spread_board(design, spec)
    z = deviations(np.random.default_rng(seed), variables, samples, distribution)
    largest = max(chunk, BATCH_ROWS // chunk * chunk)
    failed, start, batch = 0, 0, chunk
    while start < samples:
        stop = min(start + batch, samples)
        try:
            vals = metric_columns(board, variables, z[start:stop])
        except ValueError:
            if batch == chunk:
                raise
            batch = chunk
            continue
        failing = ~_in_bands(vals, spec)
        for first in range(start, stop, chunk):
            failed += int(np.count_nonzero(failing[first - start : first - start + chunk]))
            if max_failures is not None and failed > max_failures:
                return samples - failed, first + chunk >= samples
        start, batch = stop, min(2 * batch, largest)
    return samples - failed, True


def monte_carlo_samples(
    design: AnyBoard,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> FloatArray:
    """The boards ``monte_carlo`` draws (same seed, same order): an array (samples, 3) with
    columns as ``spread.METRICS`` (frequency in Hz, triangle amplitude in Vpp, duty as a
    fraction of the period), for histograms."""
    check_inputs(design, spec)
    board, variables = spread_board(design, spec)
    z = deviations(np.random.default_rng(seed), variables, samples, distribution)
    return metric_columns(board, variables, z).T
