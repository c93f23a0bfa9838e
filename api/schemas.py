"""Request bodies (pydantic, unknown keys rejected, numbers strict: a boolean or a string is
not a number) and the small response shapes of the API: problem details and health.

Results themselves are the library's: ``tristock.designs.results.DesignResult``, the dicts of
``tristock.report.board`` (described by ``tristock.api.reports``); part items are the
``tristock.stock.parts`` dataclasses, field for field the columns of the tables.
"""

from __future__ import annotations

from typing import Any, Literal, TypeAlias

from pydantic import BaseModel, ConfigDict, Field, model_validator

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import AnyBoard
from tristock.export.designfile import design_for
from tristock.spec.model import RankBy, Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

from .settings import MAX_PERIODS, MAX_POINTS, MAX_SAMPLES, MAX_STOCK, MAX_TOP

Kind = Literal["resistors", "capacitors", "opamps", "pots", "comparators", "diodes"]
Engine = Literal["cpsat", "enumerate"]
#: A designator's part: a stock code, or an object with an ``id`` (a candidate's part as the
#: design answer gives it).
PartRef: TypeAlias = str | dict[str, Any]


TIME_LIMIT_HELP = (
    "seconds for the whole search (default 5 s); a larger value is cut to the server's cap "
    "(30 s unless TRISTOCK_MAX_TIME_LIMIT_S says otherwise): `search.time_limit_s` in the "
    "answer is the limit used"
)


class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class DesignRequest(_Body):
    """``POST /v1/design``: a spec; ``top`` and ``by`` override ``spec.ranking``."""

    spec: Spec
    top: int | None = Field(None, ge=1, le=MAX_TOP, description="designs wanted")
    by: RankBy | None = Field(None, description="ranking (overrides spec.ranking.by)")
    engine: Engine = Field("enumerate", description="search engine; both are exact")
    time_limit_s: float | None = Field(None, gt=0, description=TIME_LIMIT_HELP)
    all_variants: bool = Field(
        False,
        description="rank every variant on its own; by default the top are distinct designs, "
        "each with its `variants` (R1/R2 scaled together, U1 of the same electrical "
        "parameters in another package, a part of equal value, tolerance and tempco under "
        "another stock code)",
    )


class DesignBody(_Body):
    """A design: the spec and the stock code of each designator (U1, R1, R2, R3, C1, and the
    variants' own: U2, R5, D1..D4, R3A/R3B)."""

    spec: Spec
    parts: dict[str, PartRef] = Field(
        description="designator -> stock code (or an object with an id); trimmed and tuned "
        "designs add RV1, R4 and C2..Cn"
    )
    wiper: float = Field(0.0, ge=0.0, le=1.0, description="pot wiper position (RV1), 0..1")
    range: str = Field(
        "C1", pattern=r"^C[1-8]$", description="tuned designs: the range capacitor in use"
    )
    topology: str | None = Field(
        None,
        description="the circuit (" + ", ".join(TOPOLOGIES) + "); default: the spec's "
        "[circuit], else opamp_schmitt. A DESIGN file names it when it is another",
    )

    def board(self, catalog: Catalog) -> AnyBoard:
        """The board this body names on ``catalog`` (``export.designfile.design_for``)."""
        return design_for(
            self.spec,
            self.parts,
            catalog,
            wiper=self.wiper,
            selected=self.range,
            topology=self.topology,
        )


class AnalyseRequest(DesignBody):
    """``POST /v1/analyse``: a design, with the Monte Carlo settings of ``tristock analyse``."""

    samples: int = Field(20000, ge=1, le=MAX_SAMPLES, description="Monte Carlo samples")
    seed: int = Field(0, ge=0, le=2**32 - 1, description="Monte Carlo seed")
    distribution: Literal["normal", "uniform"] = "normal"


class SimulateRequest(DesignBody):
    """``POST /v1/simulate``: a design, the periods to measure and the waveform sample cap."""

    periods: int = Field(10, ge=1, le=MAX_PERIODS, description="settled periods to measure")
    max_points: int = Field(4000, ge=16, le=MAX_POINTS, description="samples per waveform")


class ReoptimiseRequest(DesignBody):
    """``POST /v1/reoptimise``: a design, the stock codes now unavailable, and the build."""

    without: list[str] = Field(
        default_factory=list, max_length=1000, description="stock codes that may not be used"
    )
    boards: int | None = Field(None, ge=1, le=10_000_000, description="boards to build")
    top: int | None = Field(None, ge=1, le=MAX_TOP, description="designs wanted")
    time_limit_s: float | None = Field(None, gt=0, description=TIME_LIMIT_HELP)


class StockPatch(_Body):
    """``PATCH /v1/catalog/{kind}/{id}``: exactly one of ``stock`` (set) or ``stock_delta``
    (add; negative takes pieces, never below zero)."""

    stock: int | None = Field(None, ge=0, le=MAX_STOCK, description="pieces on hand")
    stock_delta: int | None = Field(
        None, ge=-MAX_STOCK, le=MAX_STOCK, description="pieces to add (negative: take)"
    )

    @model_validator(mode="after")
    def _exactly_one(self) -> StockPatch:
        if (self.stock is None) == (self.stock_delta is None):
            raise ValueError("give exactly one of stock or stock_delta")
        return self


Item: TypeAlias = Resistor | Capacitor | OpAmp | Pot


class Page(BaseModel):
    """One page of a table: the matching parts from ``offset`` and how many match in all."""

    items: list[Item]
    total: int
    offset: int
    limit: int


class FieldError(BaseModel):
    """One validation problem: ``loc`` is the path (``["body", "spec", "frequency",
    "target_hz"]``), ``field`` the same path without its first element, dotted."""

    loc: list[str | int]
    field: str
    msg: str
    type: str


class Problem(BaseModel):
    """An error (RFC 9457 problem details, ``application/problem+json``): ``type`` is
    ``about:blank`` (the status says it all) or ``/problems/{name}``; ``detail`` is meant for
    a person; ``instance`` is the request path. Other members may follow."""

    model_config = ConfigDict(extra="allow")

    type: str
    title: str
    status: int
    detail: str
    instance: str | None = None


class ValidationProblem(Problem):
    """A 422 ``invalid-request``: ``errors`` names every field that is wrong."""

    errors: list[FieldError]


#: The names the routers use for error answers.
ErrorBody = Problem
ValidationBody = ValidationProblem


class ComputeStatus(BaseModel):
    """This worker's compute slots: how many, busy now, waiting now, done and refused (503)
    since it started."""

    slots: int
    running: int
    waiting: int
    done: int
    refused: int


class Health(BaseModel):
    status: Literal["ok", "degraded", "unavailable"]
    version: str
    catalog: str
    counts: dict[str, int]
    reloads: int
    loaded_at: float | None
    last_reload_error: list[str] | None
    last_reload_error_at: float | None
    writes: Literal["token", "open", "disabled"]
    compute: ComputeStatus
