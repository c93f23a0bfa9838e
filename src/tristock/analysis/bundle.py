"""Tolerance analysis of one design: worst case, Monte Carlo yield, sensitivities, drift.

Every figure comes from the design's topology: its vectorised closed-form ``predict`` over
the spread box it declares (``Topology.spread``; the variables, their ranges and units are
listed in the topology's spread module);
``tristock.analysis.worstcase`` searches that box for the extremes, this module samples it (Monte
Carlo) and differentiates the model at the nominal point.

The nominal operating point (``analyse().predicted``, ``sensitivities``,
``temperature_drift``) is ``Design.oscillator`` at nominal rails: the op amp as catalogued,
typical offset and bias with a + sign. The spread analyses (``worst_case``, ``monte_carlo``)
centre the offsets on 0 V, which is what "± typical" means.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.analysis.montecarlo import Distribution, YieldResult, monte_carlo_many
from tristock.analysis.sensitivity import (
    Drift,
    Sensitivity,
    nominal_oscillator,
    sensitivities,
    temperature_drift,
)
from tristock.analysis.spread import check_inputs
from tristock.analysis.worstcase import WorstCase, worst_cases
from tristock.circuits.board import AnyBoard
from tristock.circuits.topology import Prediction
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]


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
    design: AnyBoard,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> Analysis:
    """Nominal prediction, worst case, Monte Carlo yield, sensitivities and drift of one
    design against one spec (see the functions of the same names)."""
    return analyse_many([design], spec, samples=samples, seed=seed, distribution=distribution)[0]


def analyse_many(
    designs: Sequence[AnyBoard],
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> list[Analysis]:
    """``analyse`` of each design, their worst cases searched together (``worst_cases``) and
    their Monte Carlo samples drawn together (``monte_carlo_many``): the same answers, fewer
    and larger model calls."""
    for design in designs:
        check_inputs(design, spec)
    return [
        Analysis(
            predicted=nominal_oscillator(design, spec).prediction(),
            worst_case=wc,
            yield_result=result,
            sensitivity=sensitivities(design, spec),
            drift=temperature_drift(design, spec),
        )
        for design, wc, result in zip(
            designs,
            worst_cases(designs, spec),
            monte_carlo_many(designs, spec, samples=samples, seed=seed, distribution=distribution),
            strict=True,
        )
    ]
