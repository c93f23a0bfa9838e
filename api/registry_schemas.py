"""Request bodies of the registry's endpoints (unknown keys rejected, numbers strict)."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field, model_validator

from tristock.spec.limits import BOARDS, STOCK

from .schemas import TIME_LIMIT_HELP, DesignBody


class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class ReleaseRequest(_Body):
    """``POST /v1/designs``: a design (spec and parts) stored as the next revision of
    ``name``."""

    name: str = Field(
        min_length=1,
        max_length=100,
        pattern=r"^[A-Za-z0-9][A-Za-z0-9._-]*$",
        description="letters, digits, '.', '_', '-'",
    )
    design: DesignBody
    boards: int | None = Field(
        None, ge=BOARDS[0], le=BOARDS[1], description="planned build (default: the spec's)"
    )
    note: str = Field("", max_length=2000, description="free text kept with the revision")


class StockChangeBody(_Body):
    """One hypothetical stock change: ``stock`` (the new count) or ``stock_delta``."""

    id: str = Field(min_length=1, max_length=200)
    stock: int | None = Field(None, ge=STOCK[0], le=STOCK[1])
    stock_delta: int | None = Field(None, ge=-STOCK[1], le=STOCK[1])

    @model_validator(mode="after")
    def _one_of(self) -> StockChangeBody:
        if (self.stock is None) == (self.stock_delta is None):
            raise ValueError("give exactly one of stock and stock_delta")
        return self


class ImpactRequest(_Body):
    """``POST /v1/impact``: optional hypothetical stock changes (the tables are not
    touched)."""

    what_if: list[StockChangeBody] = Field(default_factory=list, max_length=10_000)
    time_limit_s: float | None = Field(None, gt=0, description=TIME_LIMIT_HELP)
    top: int = Field(5, ge=1, le=20, description="answers kept from each re-optimisation")


class AcceptRequest(_Body):
    """``POST /v1/designs/{name}/accept``: an impact answer (``POST /v1/impact``) whose
    proposal changes this design."""

    proposal: dict[str, Any]
