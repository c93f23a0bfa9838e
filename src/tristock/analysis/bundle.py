"""Tolerance analysis of one design: worst case, Monte Carlo yield, sensitivities, drift.

Every figure comes from the vectorised closed-form model ``tristock.circuit.predict`` over the
spread box of ``tristock.spread`` (the variables, their ranges and units are listed there);
``tristock.worstcase`` searches that box for the extremes, this module samples it (Monte
Carlo) and differentiates the model at the nominal point.

The nominal operating point (``analyse().predicted``, ``sensitivities``,
``temperature_drift``) is ``Design.oscillator`` at nominal rails: the op amp as catalogued,
typical offset and bias with a + sign. The spread analyses (``worst_case``, ``monte_carlo``)
centre the offsets on 0 V, which is what "± typical" means.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np
import numpy.typing as npt
from scipy import special, stats

from tristock.analysis.spread import (
    DELAY_SPREAD,
    METRICS,
    OFFSET_BOUND,
    POINT_FIELDS,
    SLEW_SPREAD,
    Board,
    SpreadVariable,
    check_inputs,
    evaluate,
    metric_table,
    predict_point,
    spread_board,
)
from tristock.analysis.worstcase import MAX_CORNER_VARIABLES, WorstCase, worst_case
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.oscillator import Oscillator, Prediction
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]
Distribution = Literal["normal", "uniform"]

#: A "normal" tolerance is this many standard deviations, and the normal is truncated there.
NORMAL_SIGMAS = 3.0
#: Relative step of the log-space central differences in ``sensitivities``.
SENSITIVITY_STEP = 1e-4
#: Confidence level of the yield interval.
CONFIDENCE = 0.95


# --------------------------------------------------------------------------------------------
# Monte Carlo


@dataclass(frozen=True)
class YieldResult:
    """Monte Carlo yield: the share of boards with f inside the spec's frequency band AND the
    triangle amplitude inside its band.

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
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    p = passed / samples
    denom = 1 + z * z / samples
    centre = (p + z * z / (2 * samples)) / denom
    half = z * math.sqrt(p * (1 - p) / samples + z * z / (4 * samples * samples)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


def _deviations(
    rng: np.random.Generator, variables: list[SpreadVariable], samples: int, distribution: str
) -> FloatArray:
    """(samples, n) deviations: temperature uniform over [-1, 1]; the rest uniform over
    [-1, 1] or normal with σ = 1/NORMAL_SIGMAS truncated at ±1 (inverse-CDF sampling)."""
    z = np.empty((samples, len(variables)))
    edge = float(special.ndtr(-NORMAL_SIGMAS))
    for i, var in enumerate(variables):
        u = rng.random(samples)
        if var.temperature or distribution == "uniform":
            z[:, i] = 2.0 * u - 1.0
        else:
            z[:, i] = special.ndtri(edge + u * (1.0 - 2.0 * edge)) / NORMAL_SIGMAS
    return z


def monte_carlo(
    design: Design,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> YieldResult:
    """Monte Carlo yield over the spread variables of the module docstring.

    ``distribution="normal"`` (default): each ± bound is 3σ of a normal truncated at the
    bound (tolerances, class II band, rails, offsets, bias, slew, delay alike; an offset's σ
    is therefore the catalogued typical/3). ``"uniform"``: uniform over each ± bound.
    Temperature is uniform over the environment range in both. numpy Generator seeded with
    ``seed``; the same seed gives the same samples.
    """
    check_inputs(design, spec)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
        raise ValueError(f"samples: must be an integer >= 1, got {samples!r}")
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ValueError(f"seed: must be an integer >= 0, got {seed!r}")
    if distribution not in ("normal", "uniform"):
        raise ValueError(f"distribution: must be 'normal' or 'uniform', got {distribution!r}")
    board, variables = spread_board(design, spec)
    rng = np.random.default_rng(seed)
    z = _deviations(rng, variables, samples, distribution)
    vals = evaluate(board, variables, z)
    f, amp = vals[:, 0], vals[:, 1]
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    ok = (
        (f >= ft * (1 - tf))
        & (f <= ft * (1 + tf))
        & (amp >= at * (1 - ta))
        & (amp <= at * (1 + ta))
    )
    passed = int(np.count_nonzero(ok))
    spread = {
        metric: {
            "min": float(np.min(vals[:, m])),
            "p1": float(np.percentile(vals[:, m], 1)),
            "p50": float(np.percentile(vals[:, m], 50)),
            "p99": float(np.percentile(vals[:, m], 99)),
            "max": float(np.max(vals[:, m])),
        }
        for m, metric in enumerate(METRICS)
    }
    return YieldResult(
        fraction=passed / samples,
        passed=passed,
        samples=samples,
        confidence=CONFIDENCE,
        confidence_interval=wilson_interval(passed, samples, CONFIDENCE),
        seed=seed,
        distribution=distribution,
        spread=spread,
    )


def yield_count(
    design: Design,
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
    ``monte_carlo(...).passed`` whenever it is exact."""
    check_inputs(design, spec)
    board, variables = spread_board(design, spec)
    z = _deviations(np.random.default_rng(seed), variables, samples, distribution)
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    failed = 0
    for start in range(0, samples, chunk):
        vals = evaluate(board, variables, z[start : start + chunk])
        f, amp = vals[:, 0], vals[:, 1]
        ok = (f >= ft * (1 - tf)) & (f <= ft * (1 + tf)) & (amp >= at * (1 - ta))
        ok &= amp <= at * (1 + ta)
        failed += int(len(ok) - np.count_nonzero(ok))
        if max_failures is not None and failed > max_failures:
            return samples - failed, start + chunk >= samples
    return samples - failed, True


# --------------------------------------------------------------------------------------------
# Sensitivities

#: Sensitivity name -> the fields of the point it scales.
_SENSITIVITY_FIELDS: dict[str, tuple[str, ...]] = {
    "R1": ("r1",),
    "R2": ("r2",),
    "R3": ("r3",),
    "C1": ("c1",),
    "V+": ("v_pos",),
    "V-": ("v_neg",),
    "U1.slew": ("slew_rise", "slew_fall"),
    "U1.delay": ("delay",),
    "U1.gbw": ("gbw",),
    "U1.swing_pos": ("swing_pos",),
    "U1.swing_neg": ("swing_neg",),
    "U1.offset": ("vos1", "vos2"),
    "U1.bias": ("ib1", "ib2"),
}


@dataclass(frozen=True)
class Sensitivity:
    """Normalised sensitivities S = (x/y)·(∂y/∂x) = ∂ln y/∂ln x of y = frequency and y =
    triangle amplitude, keyed by "R1", "R2", "R3", "C1", "V+", "V-", "U1.slew", "U1.delay",
    "U1.gbw", "U1.swing_pos", "U1.swing_neg", "U1.offset", "U1.bias"."""

    frequency: dict[str, float]
    amplitude: dict[str, float]

    def to_dict(self) -> dict[str, Any]:
        return {"frequency": dict(self.frequency), "amplitude": dict(self.amplitude)}


def _nominal(design: Design, spec: Spec) -> Oscillator:
    return design.oscillator(rails_from_supply(spec.supply), 25.0)


def sensitivities(design: Design, spec: Spec) -> Sensitivity:
    """Normalised sensitivities at the nominal point (25 °C, nominal rails, op amp as
    catalogued), by central differences in log space:
    S ≈ [ln y(x·e^h) - ln y(x·e^-h)]/(2h), h = SENSITIVITY_STEP.

    "U1.slew" scales rise and fall slew together, "U1.offset" both channels' offsets, "U1.bias"
    both bias currents (they are one part's parameters). A parameter that is zero (offset 0,
    a single supply's V- = 0) has S = x·∂ln y/∂x = 0 exactly and is reported as 0.0; an
    infinite one (slew or GBW = inf) has S = 0 in the limit and comes out as 0.0.
    """
    check_inputs(design, spec)
    board = Board.of(design, rails_from_supply(spec.supply), 25.0)
    names = list(_SENSITIVITY_FIELDS)
    rows = 2 * len(names)
    factors = {f: np.ones(rows) for f in POINT_FIELDS}
    for i, name in enumerate(names):
        for f in _SENSITIVITY_FIELDS[name]:
            factors[f][2 * i] = math.exp(SENSITIVITY_STEP)
            factors[f][2 * i + 1] = math.exp(-SENSITIVITY_STEP)
    point = replace(board.point, **{f: getattr(board.point, f) * factors[f] for f in factors})
    vals = metric_table(predict_point(point, board.v_ref, board.control), rows)
    with np.errstate(invalid="ignore"):
        logs = np.log(vals[:, :2])
    slopes = (logs[0::2] - logs[1::2]) / (2 * SENSITIVITY_STEP)
    out: list[dict[str, float]] = [{}, {}]
    for i, name in enumerate(names):
        zero = all(getattr(board.point, f) == 0 for f in _SENSITIVITY_FIELDS[name])
        for j in range(2):
            s = float(slopes[i, j])
            out[j][name] = 0.0 if zero or not math.isfinite(s) else s
    return Sensitivity(frequency=out[0], amplitude=out[1])


# --------------------------------------------------------------------------------------------
# Temperature drift


@dataclass(frozen=True)
class Drift:
    """End-point temperature drift (ppm/°C) of frequency and amplitude between ``temp_low_c``
    and ``temp_high_c``: 1e6·[y(T_high) - y(T_low)]/[y(25 °C)·(T_high - T_low)]."""

    frequency_ppm_per_c: float
    amplitude_ppm_per_c: float
    temp_low_c: float
    temp_high_c: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency_ppm_per_c": self.frequency_ppm_per_c,
            "amplitude_ppm_per_c": self.amplitude_ppm_per_c,
            "temp_low_c": self.temp_low_c,
            "temp_high_c": self.temp_high_c,
        }


def temperature_drift(design: Design, spec: Spec) -> Drift:
    """Frequency and amplitude drift over the environment range (end-point slope; a range
    that is a single point T0 uses T0 ± 1 °C), at nominal rails with the op amp as catalogued.

    Values move by their tempcos (``Design.oscillator``); R1 and R2 share the temperature, so
    with equal tempcos k = R1/R2 is constant and they add no amplitude drift. A class II
    capacitor has no linear tempco and adds nothing here (its band is in the worst case).
    """
    check_inputs(design, spec)
    env = spec.environment
    lo, hi = env.temp_min_c, env.temp_max_c
    if hi == lo:
        lo, hi = lo - 1.0, hi + 1.0
    rails = rails_from_supply(spec.supply)
    ref = design.oscillator(rails, 25.0).prediction()
    p_lo = design.oscillator(rails, lo).prediction()
    p_hi = design.oscillator(rails, hi).prediction()

    def slope(y_lo: float, y_hi: float, y_ref: float) -> float:
        return 1e6 * (y_hi - y_lo) / (y_ref * (hi - lo))

    return Drift(
        frequency_ppm_per_c=slope(
            float(p_lo.frequency_hz), float(p_hi.frequency_hz), float(ref.frequency_hz)
        ),
        amplitude_ppm_per_c=slope(
            float(p_lo.amplitude_vpp), float(p_hi.amplitude_vpp), float(ref.amplitude_vpp)
        ),
        temp_low_c=lo,
        temp_high_c=hi,
    )


# --------------------------------------------------------------------------------------------
# The bundle


@dataclass(frozen=True)
class Analysis:
    """Everything about one design: the nominal prediction (25 °C, nominal rails), worst
    case, Monte Carlo yield, sensitivities and temperature drift."""

    predicted: Prediction
    worst_case: WorstCase
    yield_result: YieldResult
    sensitivity: Sensitivity
    drift: Drift

    @property
    def yield_fraction(self) -> float:
        return self.yield_result.fraction

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready data (plain floats, lists and dicts)."""
        p = self.predicted
        return {
            "predicted": {
                "frequency_hz": float(p.frequency_hz),
                "amplitude_vpp": float(p.amplitude_vpp),
                "duty_high": float(p.duty_high),
                "offset_v": float(p.offset_v),
                "square_high_v": float(p.square_high_v),
                "square_low_v": float(p.square_low_v),
                "timing_share": float(p.timing_share),
            },
            "worst_case": self.worst_case.to_dict(),
            "yield_fraction": self.yield_fraction,
            "yield": self.yield_result.to_dict(),
            "sensitivity": self.sensitivity.to_dict(),
            "drift": self.drift.to_dict(),
        }


def analyse(
    design: Design,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> Analysis:
    """Nominal prediction, worst case, Monte Carlo yield, sensitivities and drift of one
    design against one spec (see the functions of the same names)."""
    check_inputs(design, spec)
    return Analysis(
        predicted=_nominal(design, spec).prediction(),
        worst_case=worst_case(design, spec),
        yield_result=monte_carlo(
            design, spec, samples=samples, seed=seed, distribution=distribution
        ),
        sensitivity=sensitivities(design, spec),
        drift=temperature_drift(design, spec),
    )


__all__ = [
    "CONFIDENCE",
    "DELAY_SPREAD",
    "MAX_CORNER_VARIABLES",
    "NORMAL_SIGMAS",
    "OFFSET_BOUND",
    "SENSITIVITY_STEP",
    "SLEW_SPREAD",
    "Analysis",
    "Drift",
    "Sensitivity",
    "WorstCase",
    "YieldResult",
    "analyse",
    "monte_carlo",
    "sensitivities",
    "temperature_drift",
    "wilson_interval",
    "worst_case",
    "yield_count",
]
