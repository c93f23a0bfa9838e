"""The engineer's targets: one pydantic model shared by the CLI, the library and the HTTP API.

A spec is read from TOML or JSON. Unknown keys are errors: a typo must never silently change the
answer. Every default is stated on its field.
"""

from __future__ import annotations

import math
from typing import Annotated, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    StrictBool,
    field_validator,
    model_validator,
)

from tristock.spec import limits
from tristock.spec.circuit import CircuitSpec
from tristock.spec.fieldtypes import AtLeast, Count, Number, auto_or_count, strict_number
from tristock.stock.eseries import parse_series

#: Design-practice bounds on a timing or threshold resistor (ohm). Below about 1 kΩ the op amp's
#: output current and the resistor's power become the limit; above about 1 MΩ bias currents,
#: leakage and board contamination start to matter.
DEFAULT_RESISTANCE_MIN_OHM = 1_000.0
DEFAULT_RESISTANCE_MAX_OHM = 1_000_000.0

#: Largest share of the period the op amps' timing (delay, slew, GBW) may set, 1 - T_ideal/T.
#: Common practice: past about a tenth the frequency follows part-to-part timing spread more
#: than the R and C chosen. Capped at 0.4, where each transition still ends well before the
#: next threshold (τ ≤ share·T/2) and the model holds.
DEFAULT_MAX_TIMING_SHARE = 0.10

#: Dielectrics allowed in the integrator when the spec names none: class I ceramic and films.
DEFAULT_DIELECTRICS = ("C0G", "NP0", "PP", "PET", "PPS", "PEN", "PS")


#: The floors below which a value is physics the model cannot use (see README, "The spec").
MIN_RAIL_V = 0.1
MIN_FREQUENCY_HZ = 1e-3
MIN_AMPLITUDE_VPP = 1e-3
MIN_BAND_PCT = 0.01
MIN_COST = 1e-4
MAX_COST = 1e6

_RAIL_WHY = (
    "a rail that close to the reference leaves the square no room to swing on that side "
    "(output stages stop tens of millivolts short of their rails)"
)
_FREQUENCY_WHY = (
    "below 1 mHz a period exceeds 16 minutes, beyond any R3·C1 a stock room holds, and "
    "capacitor leakage sets the timing"
)
_AMPLITUDE_WHY = (
    "below 1 mV the thresholds are of the size of op-amp offsets (0.1..10 mV), so the amplitude "
    "is no longer set by R1/R2"
)
_BAND_WHY = (
    "±100 ppm is what a few degrees of drift of common parts (25..100 ppm/°C) move an RC "
    "timing; no stock-room RC oscillator holds a narrower band"
)
_COST_WHY = "the search counts cost in steps of 0.0001 currency units"


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)


class SupplySpec(_Section):
    """Supply rails (V). ``negative_v = 0`` means a single supply with a reference node."""

    positive_v: Annotated[Number, AtLeast(MIN_RAIL_V, "V", _RAIL_WHY)] = Field(
        le=60, description="positive rail (V), at least 0.1 V"
    )
    negative_v: Number = Field(
        le=0, ge=-60, description="negative rail (V); 0 = single supply, else at most -0.1 V"
    )
    tolerance_pct: Number = Field(0.0, ge=0, le=20, description="rail tolerance, ± % (default 0)")
    reference_v: Number | None = Field(
        None, description="single supply only: reference node (V); default mid-rail"
    )

    @model_validator(mode="after")
    def _reference_inside_rails(self) -> SupplySpec:
        if -MIN_RAIL_V < self.negative_v < 0:
            raise ValueError(
                f"negative_v {self.negative_v:g} V: give 0 (single supply) or at most "
                f"-{MIN_RAIL_V:g} V; {_RAIL_WHY}"
            )
        if self.reference_v is not None:
            if self.negative_v != 0:
                raise ValueError("reference_v is for a single supply (negative_v = 0) only")
            if not 0 < self.reference_v < self.positive_v:
                raise ValueError(
                    f"reference_v {self.reference_v} V must lie between the rails "
                    f"(0 V and {self.positive_v} V)"
                )
        return self

    @property
    def reference(self) -> float:
        """Reference node (V): ground for split rails, the given or mid-rail for a single supply."""
        if self.negative_v < 0:
            return 0.0
        return self.reference_v if self.reference_v is not None else self.positive_v / 2

    @property
    def span_v(self) -> float:
        return self.positive_v - self.negative_v


class FrequencySpec(_Section):
    """Target frequency (Hz) and the acceptance band, ± % around it."""

    target_hz: Annotated[Number, AtLeast(MIN_FREQUENCY_HZ, "Hz", _FREQUENCY_WHY)] = Field(
        le=10e6, description="target frequency (Hz), 1 mHz..10 MHz"
    )
    tolerance_pct: Annotated[Number, AtLeast(MIN_BAND_PCT, "%", _BAND_WHY)] = Field(
        le=50, description="acceptance band, ± % (0.01..50)"
    )


class TriangleSpec(_Section):
    """Target triangle peak-to-peak amplitude (V) and its band, ± %."""

    amplitude_vpp: Annotated[Number, AtLeast(MIN_AMPLITUDE_VPP, "V", _AMPLITUDE_WHY)] = Field(
        description="triangle peak-to-peak (V), at least 1 mV"
    )
    tolerance_pct: Annotated[Number, AtLeast(MIN_BAND_PCT, "%", _BAND_WHY)] = Field(
        le=50, description="acceptance band, ± % (0.01..50)"
    )


class EnvironmentSpec(_Section):
    """Operating temperature range (°C); default 25..25 (bench)."""

    temp_min_c: Number = Field(25.0, ge=-60, le=200)
    temp_max_c: Number = Field(25.0, ge=-60, le=200)

    @model_validator(mode="after")
    def _ordered(self) -> EnvironmentSpec:
        if self.temp_min_c > self.temp_max_c:
            raise ValueError(
                f"temp_min_c ({self.temp_min_c}) is above temp_max_c ({self.temp_max_c})"
            )
        return self


class BuildSpec(_Section):
    """Build quantity: stock must cover ``boards`` x the uses of each part on a board."""

    boards: Count = Field(1, ge=limits.BOARDS[0], le=limits.BOARDS[1])


Guarantee = Literal["nominal", "worst_case", "yield"]
RankBy = Literal["balanced", "frequency_error", "cost", "yield"]


class LimitsSpec(_Section):
    """Optional limits on the choice. Defaults: any series, class I and film dielectrics,
    1 kΩ to 1 MΩ, any op amp, guarantee ``nominal``, min_yield 0.99, max_timing_share 0.10."""

    # An optional field's bounds sit inside its type, so the JSON schema shows them.
    max_cost: (
        Annotated[
            float,
            Field(le=MAX_COST),
            BeforeValidator(strict_number),
            AtLeast(MIN_COST, "", _COST_WHY),
        ]
        | None
    ) = Field(None, description="per board, the catalog's currency (0.0001..1e6)")
    resistor_series: tuple[str, ...] | None = Field(
        None,
        description="R1..R3 values must belong to one of these E-series (a part labelled with the "
        "series, or whose value is a member); default any, non-standard values included",
    )
    dielectrics: tuple[str, ...] = Field(
        DEFAULT_DIELECTRICS, description="allowed C1 dielectrics; default class I and films"
    )
    resistance_min_ohm: Number = Field(DEFAULT_RESISTANCE_MIN_OHM, gt=0)
    resistance_max_ohm: Number = Field(DEFAULT_RESISTANCE_MAX_OHM, gt=0)
    opamps: tuple[str, ...] | None = Field(None, description="restrict U1 to these ids")
    guarantee: Guarantee = "nominal"
    min_yield: Number = Field(0.99, gt=0, le=1)
    max_timing_share: Number = Field(
        DEFAULT_MAX_TIMING_SHARE,
        gt=0,
        le=0.4,
        description="largest share of the period set by op-amp delay, slew and GBW "
        "(1 - T_ideal/T); default 0.10",
    )

    @field_validator("resistor_series")
    @classmethod
    def _known_series(cls, names: tuple[str, ...] | None) -> tuple[str, ...] | None:
        if names is None:
            return None
        return tuple(parse_series(n) for n in names)

    @field_validator("dielectrics")
    @classmethod
    def _known_dielectrics(cls, names: tuple[str, ...]) -> tuple[str, ...]:
        from tristock.stock.parts import KNOWN_DIELECTRICS

        out = tuple(n.strip().upper() for n in names)
        unknown = [n for n in out if n not in KNOWN_DIELECTRICS]
        if unknown:
            raise ValueError(
                f"unknown dielectric {unknown[0]!r}; known: {', '.join(sorted(KNOWN_DIELECTRICS))}"
            )
        if not out:
            raise ValueError("at least one dielectric is needed")
        return out

    @model_validator(mode="after")
    def _ordered(self) -> LimitsSpec:
        if self.resistance_min_ohm >= self.resistance_max_ohm:
            raise ValueError(
                f"resistance_min_ohm ({self.resistance_min_ohm}) is not below "
                f"resistance_max_ohm ({self.resistance_max_ohm})"
            )
        return self


class RankingSpec(_Section):
    """How candidates are ordered (see README, "Ranking") and how many are returned."""

    by: RankBy = "balanced"
    top: Count = Field(10, ge=limits.TOP[0], le=limits.TOP[1])


class TrimSpec(_Section):
    """A trimmer (RV1, from pots.csv, kind trimmer) in series with R3 sets the frequency.

    Every board, at every corner of tolerance, rails, op-amp spread and temperature, must
    reach the target with the wiper inside [margin, 1 - margin] of its travel.
    """

    enabled: StrictBool = True
    margin_pct: Number = Field(10.0, ge=0, lt=50, description="travel kept free at each end, %")
    drift_after_trim_pct: (
        Annotated[
            float,
            Field(le=50),
            BeforeValidator(strict_number),
            AtLeast(MIN_BAND_PCT, "%", _BAND_WHY),
        ]
        | None
    ) = Field(
        None, description="allowed drift over temperature after trimming at 25 °C, ±% (0.01..50)"
    )


class TuningSpec(_Section):
    """A front-panel pot tunes low_hz..high_hz, with one timing capacitor per range."""

    low_hz: Annotated[Number, AtLeast(MIN_FREQUENCY_HZ, "Hz", _FREQUENCY_WHY)] = Field(le=10e6)
    high_hz: Annotated[Number, AtLeast(MIN_FREQUENCY_HZ, "Hz", _FREQUENCY_WHY)] = Field(le=10e6)
    control: Literal["series", "divider"] = Field(
        "series",
        description="series: pot in series with R3; divider: pot as a divider feeding R3, "
        "with an end-stop resistor R4",
    )
    ranges: Annotated[Literal["auto"] | int, BeforeValidator(auto_or_count)] = Field(
        "auto", description='"auto" (fewest) or a count 1..8'
    )
    overlap_pct: Number = Field(5.0, ge=0, le=50, description="overlap of neighbouring ranges, %")

    @field_validator("ranges")
    @classmethod
    def _count(cls, n: Literal["auto"] | int) -> Literal["auto"] | int:
        if n != "auto" and not 1 <= n <= 8:
            raise ValueError(f"ranges must be 'auto' or 1..8, got {n}")
        return n

    @model_validator(mode="after")
    def _ordered(self) -> TuningSpec:
        if self.low_hz >= self.high_hz:
            raise ValueError(f"low_hz ({self.low_hz}) is not below high_hz ({self.high_hz})")
        return self


class Spec(_Section):
    """A whole design request: [frequency] for a fixed or trimmed design, or [tuning]."""

    supply: SupplySpec
    frequency: FrequencySpec | None = None
    triangle: TriangleSpec
    environment: EnvironmentSpec = EnvironmentSpec()
    build: BuildSpec = BuildSpec()
    limits: LimitsSpec = LimitsSpec()
    ranking: RankingSpec = RankingSpec()
    trim: TrimSpec | None = None
    tuning: TuningSpec | None = None
    #: Left out of dumps while it is the default, so answers and DESIGN files of today's
    #: circuit read as before.
    circuit: CircuitSpec = Field(CircuitSpec(), exclude_if=lambda c: c == CircuitSpec())

    @model_validator(mode="after")
    def _one_kind_of_design(self) -> Spec:
        if self.tuning is not None:
            if self.trim is not None and self.trim.enabled:
                raise ValueError("trim and tuning cannot be combined: choose one")
        elif self.frequency is None:
            raise ValueError("frequency: missing (a [frequency] section, or a [tuning] section)")
        if self.circuit != CircuitSpec() and (self.tuning is not None or self.trimmed):
            kind = "tuned" if self.tuning is not None else "trimmed"
            raise ValueError(
                f"circuit: {kind} designs build the op-amp Schmitt loop only; drop [circuit] "
                f"or the {'[tuning]' if kind == 'tuned' else '[trim]'} section"
            )
        return self

    @property
    def target(self) -> FrequencySpec:
        """The frequency target; a tuned spec has none (ValueError)."""
        if self.frequency is None:
            raise ValueError("this spec has no [frequency] target (it is a tuned design)")
        return self.frequency

    @property
    def trimmed(self) -> bool:
        return self.trim is not None and self.trim.enabled

    @model_validator(mode="after")
    def _amplitude_fits_rails(self) -> Spec:
        span = self.supply.span_v
        if self.triangle.amplitude_vpp >= span:
            raise ValueError(
                f"triangle.amplitude_vpp {self.triangle.amplitude_vpp} V does not fit inside the "
                f"{span:g} V between the rails"
            )
        return self

    @property
    def frequency_band_ln(self) -> tuple[float, float]:
        """The frequency band as ln(f/f_target) bounds."""
        t = self.target.tolerance_pct / 100
        return math.log1p(-t), math.log1p(t)

    @property
    def amplitude_band_ln(self) -> tuple[float, float]:
        t = self.triangle.tolerance_pct / 100
        return math.log1p(-t), math.log1p(t)
