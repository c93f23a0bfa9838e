"""Response models of ``POST /v1/analyse`` and ``POST /v1/simulate``: the shape of the dicts
``tristock.report.board`` builds for the CLI's ``--json`` (field for field; unknown keys are
refused, so a test that validates real answers notices when the two drift apart).

Units are in the names: ``_hz``, ``_vpp`` (volts peak to peak), ``_v``, ``_s``,
``_ppm_per_c``; ``duty_high`` is the fraction of the period the square spends high.
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

from tristock.designs.results import PartOut, Predicted, WarningOut


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid", populate_by_name=True)


Interval = list[float]


class WorstCase(_Out):
    """Lowest and highest value of each metric over every tolerance, supply, temperature and
    op-amp corner (``method`` says how they were found); ``corners`` gives, per extreme
    (``frequency_hz_lo``...), each variable's value there as text."""

    frequency_hz: Interval = Field(min_length=2, max_length=2)
    amplitude_vpp: Interval = Field(min_length=2, max_length=2)
    duty_high: Interval = Field(min_length=2, max_length=2)
    method: str
    variables: list[str]
    evaluations: int
    corners: dict[str, dict[str, str]]


class Spread(_Out):
    """Monte Carlo distribution of one metric."""

    min: float
    p1: float
    p50: float
    p99: float
    max: float


class YieldOut(_Out):
    """Share of Monte Carlo boards inside both bands, with its Wilson interval."""

    fraction: float
    passed: int
    samples: int
    confidence: float
    confidence_interval: Interval = Field(min_length=2, max_length=2)
    seed: int
    distribution: str
    spread: dict[str, Spread]


class SensitivityOut(_Out):
    """Normalised sensitivities S = ∂ln y/∂ln x of frequency and amplitude, per variable."""

    frequency: dict[str, float]
    amplitude: dict[str, float]


class DriftOut(_Out):
    """End-point temperature slopes over the spec's environment range."""

    frequency_ppm_per_c: float
    amplitude_ppm_per_c: float
    temp_low_c: float
    temp_high_c: float


class AnalysisReport(_Out):
    """``tristock analyse --json``: one design's parts, prediction, worst case, yield,
    sensitivities, drift, cost per board, BOM lines and design-check warnings."""

    parts: dict[str, PartOut]
    predicted: Predicted
    worst_case: WorstCase
    yield_fraction: float
    yield_: YieldOut = Field(alias="yield")
    sensitivity: SensitivityOut
    drift: DriftOut
    cost: float
    bom_lines: int
    warnings: list[WarningOut]


class Measured(_Out):
    """Values measured on the simulated waveforms over the settled periods."""

    frequency_hz: float
    period_s: float
    amplitude_vpp: float
    duty_high: float
    offset_v: float
    peak_high_v: float
    peak_low_v: float
    square_high_v: float
    square_low_v: float


class Headline(_Out):
    """The full model's prediction the simulation is compared with."""

    frequency_hz: float
    amplitude_vpp: float
    duty_high: float
    timing_share: float


class Difference(_Out):
    """The simulation against the full model: ``frequency_rel`` and ``amplitude_rel`` are
    simulated/predicted - 1, ``duty_abs`` simulated - predicted (fraction of the period)."""

    frequency_rel: float
    amplitude_rel: float
    duty_abs: float


class SimulationReport(_Out):
    """``tristock simulate --json``: measured values, the waveforms (``t_s`` from the start
    of the measured window; ``triangle_v``, ``square_v`` node voltages, equal lengths, at most
    ``max_points``), the full model's prediction (``predicted``: delay, slew and both
    channels' GBW, as the simulation) and the ``difference`` between them."""

    measured: Measured
    periods_measured: int
    reference_v: float
    threshold_high_v: float
    threshold_low_v: float
    settle_time_s: float
    events: int
    t_s: list[float]
    triangle_v: list[float]
    square_v: list[float]
    predicted: Headline
    difference: Difference
