"""``POST /v1/export/bom`` (text/csv) and ``POST /v1/export/spice`` (text/plain): the hand-off
files of one design, the same text as ``tristock export bom|spice DESIGN``."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter
from fastapi.responses import Response
from pydantic import Field

from tristock.circuits.board import Design
from tristock.export.bom import bill_of_materials, bom_csv
from tristock.export.spice import spice_netlist
from tristock.spec.model import Spec

from ..deps import CatalogDep, SlotsDep
from ..errors import FieldProblem
from ..schemas import DesignBody
from . import COMPUTE_ERRORS

router = APIRouter(prefix="/v1/export", tags=["export"])


class BomRequest(DesignBody):
    """``POST /v1/export/bom``: a design and the boards to build."""

    boards: int | None = Field(
        None, ge=1, le=10_000_000, description="boards to build; default spec.build.boards"
    )


class SpiceRequest(DesignBody):
    """``POST /v1/export/spice``: a design and, optionally, a worst-case corner."""

    corner: Literal["fmin", "fmax", "amin", "amax"] | None = Field(
        None, description="build at a worst-case extreme (default: nominal values)"
    )


def _netlist(spec: Spec, design: Design, corner: str | None) -> str:
    return spice_netlist(spec, design, corner=corner)


def _bom(design: Design, boards: int) -> str:
    return bom_csv(bill_of_materials(design, boards))


@router.post(
    "/bom",
    operation_id="export_bom",
    response_class=Response,
    responses={
        200: {"content": {"text/csv": {}}, "description": "the BOM as CSV (UTF-8, header)"},
        **COMPUTE_ERRORS,
    },
    summary="Bill of materials of one design for a build",
    description="The same CSV as `tristock export bom DESIGN --boards N`: one row per stock "
    "code (designators, value, tolerance, dielectric or series, package, pieces per board "
    "and for the build, unit and extended cost, stock, stock after the build, shortfall) and "
    "a total row.",
)
async def post_bom(body: BomRequest, catalog: CatalogDep, slots: SlotsDep) -> Response:
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        text = await slots.run(_bom, d, body.boards or body.spec.build.boards)
    return Response(text.encode("utf-8"), media_type="text/csv; charset=utf-8")


@router.post(
    "/spice",
    operation_id="export_spice",
    response_class=Response,
    responses={
        200: {"content": {"text/plain": {}}, "description": "the ngspice netlist"},
        **COMPUTE_ERRORS,
    },
    summary="ngspice netlist of one design at nominal values",
    description="The same netlist as `tristock export spice DESIGN [--corner C]`: "
    "behavioural op-amp models from the catalog row, at nominal values or at the worst-case "
    "`corner`, the transient run and `.meas` lines (`per`, `freq`, "
    "`duty`, `vtmax`, `vtmin`, `vtpp`). Trimmed designs at their `wiper`; tuned designs at "
    "their `wiper` and `range` (the pot's divider as the board has it; no `corner`).",
)
async def post_spice(body: SpiceRequest, catalog: CatalogDep, slots: SlotsDep) -> Response:
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        text = await slots.run(_netlist, body.spec, d, body.corner)
    return Response(text.encode("utf-8"), media_type="text/plain; charset=utf-8")
