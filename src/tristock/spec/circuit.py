"""The spec's ``[circuit]`` section: which oscillator circuit (topology) to build."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from tristock.spec.fieldtypes import Number

#: The duty band of a set-duty circuit when the spec gives none, ± percentage points.
DEFAULT_DUTY_TOLERANCE_PCT = 2.0

#: The topology each [circuit] choice builds (``tristock.circuits.TOPOLOGIES`` keys).
CIRCUIT_TOPOLOGIES = {
    ("opamp", "none", False): "opamp_schmitt",
    ("comparator", "none", False): "comparator_schmitt",
    ("opamp", "zener", False): "clamped_schmitt",
    ("opamp", "none", True): "duty_schmitt",
}


class CircuitSpec(BaseModel):
    """Which circuit to build. The defaults give the two-op-amp loop; each other choice is one
    variant (a comparator IC as the Schmitt stage, a zener-clamped square, or a set duty
    through R3A/R3B and two diodes), one at a time; ``topology = "any"`` searches every
    circuit the catalog can build and ranks them together.

    ``duty_pct``: the share of the period the square output is high (%). A value other than 50
    builds the set-duty circuit. ``duty_tolerance_pct``: the acceptance band on the duty in
    percentage points (default: none for 50 %, 2 points for a set duty).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)

    schmitt: Literal["opamp", "comparator"] = "opamp"
    clamp: Literal["none", "zener"] = "none"
    duty_pct: Number = Field(50.0, ge=5, le=95, description="share of the period high, %")
    duty_tolerance_pct: Number | None = Field(
        None, gt=0, le=20, description="duty band, ± percentage points"
    )
    topology: Literal["chosen", "any"] = Field(
        "chosen", description='"chosen": the circuit the fields above name; "any": every one'
    )

    @property
    def set_duty(self) -> bool:
        return self.duty_pct != 50.0

    @model_validator(mode="after")
    def _one_variant(self) -> CircuitSpec:
        chosen = [
            name
            for name, on in (
                ("schmitt = comparator", self.schmitt == "comparator"),
                ("clamp = zener", self.clamp == "zener"),
                (f"duty_pct = {self.duty_pct:g}", self.set_duty),
            )
            if on
        ]
        if len(chosen) > 1:
            raise ValueError(
                f"{' with '.join(chosen)}: one variant at a time (tristock models each alone)"
            )
        if self.topology == "any" and chosen:
            raise ValueError(f'topology = "any" searches every circuit: drop {chosen[0]}')
        return self

    @property
    def topology_name(self) -> str:
        """The topology these choices build ("any" for every one)."""
        if self.topology == "any":
            return "any"
        return CIRCUIT_TOPOLOGIES[(self.schmitt, self.clamp, self.set_duty)]

    @property
    def duty_band(self) -> tuple[float, float] | None:
        """The accepted duty as fractions (low, high), or None when duty is not constrained."""
        tol = self.duty_tolerance_pct
        if tol is None:
            if not self.set_duty:
                return None
            tol = DEFAULT_DUTY_TOLERANCE_PCT
        return (self.duty_pct - tol) / 100, (self.duty_pct + tol) / 100
