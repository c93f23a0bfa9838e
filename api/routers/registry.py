"""``/v1/designs`` (released designs, their revisions, accepting a proposal) and
``/v1/impact``: each a call into ``tristock.registry``; releases, acceptances and impact runs
go to a compute process (``ComputeSlots.run``) with the catalog as a parcel.

Errors: an unknown name or revision 404; a retired design or a stale proposal 409; a design
that fails its spec 422 with each reason; the database (or a Dask scheduler) unreachable 503.
"""

from __future__ import annotations

import logging
from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Path, Query, Request

from tristock.registry import (
    Registry,
    RegistryUnavailable,
    ReleaseRefused,
    RetiredDesign,
    StaleProposal,
    UnknownDesign,
)
from tristock.registry.impact import ImpactSettings, affected_by, impact
from tristock.registry.impact_report import ImpactReport
from tristock.registry.records import DesignSummary, RevisionOut
from tristock.registry.release import draft_from
from tristock.registry.revise import accept
from tristock.registry.runner import SchedulerUnavailable
from tristock.registry.whatif import StockChange, WhatIfError, apply_what_if
from tristock.stock.catalog import Catalog

from ..compute import Parcel
from ..deps import CatalogDep, SettingsDep, SlotsDep, require_writer
from ..errors import FieldProblem
from ..jsonout import StrictJSON, answer
from ..registry_schemas import AcceptRequest, ImpactRequest, ReleaseRequest
from ..schemas import ErrorBody, ValidationBody
from . import COMPUTE_ERRORS

log = logging.getLogger("tristock.api")
router = APIRouter(prefix="/v1", tags=["registry"])

_READ_ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"model": ErrorBody, "description": "no released design (or revision) by that name"},
    422: {"model": ValidationBody, "description": "invalid parameter; each item names it"},
    500: {"model": ErrorBody, "description": "internal error (no details are given)"},
    503: {"model": ErrorBody, "description": "the registry's database cannot be reached"},
}
_WRITE_ERRORS: dict[int | str, dict[str, Any]] = {
    **COMPUTE_ERRORS,
    401: {"model": ErrorBody, "description": "a token is configured and none was given"},
    403: {"model": ErrorBody, "description": "wrong token, or writes are disabled"},
    404: {"model": ErrorBody, "description": "no released design by that name"},
    409: {"model": ErrorBody, "description": "the design is retired, or the proposal is stale"},
    422: {
        "model": ValidationBody,
        "description": "invalid request, or the design fails its "
        "spec (each reason an item of `errors`)",
    },
    503: {
        "model": ErrorBody,
        "description": "the registry's database (or the Dask scheduler) "
        "cannot be reached; or every compute slot is busy",
    },
}


def registry_of(request: Request) -> Registry:
    """The app's registry, opened on first use (503 when the database cannot be reached)."""
    found: Registry | None = getattr(request.app.state, "registry", None)
    if found is None:
        settings = request.app.state.settings
        try:
            found = Registry.open(settings.catalog_dir, settings.db)
        except RegistryUnavailable as err:
            raise HTTPException(status_code=503, detail=str(err)) from None
        request.app.state.registry = found
    return found


RegistryDep = Annotated[Registry, Depends(registry_of)]


def _failures(err: Exception) -> Exception:
    """A registry error as the HTTP error it answers with."""
    if isinstance(err, UnknownDesign):
        return HTTPException(status_code=404, detail=str(err))
    if isinstance(err, RetiredDesign | StaleProposal):
        return HTTPException(status_code=409, detail=str(err))
    if isinstance(err, RegistryUnavailable | SchedulerUnavailable):
        return HTTPException(status_code=503, detail=str(err))
    if isinstance(err, ReleaseRefused):
        return FieldProblem([(["body", "design"], r) for r in err.reasons], "release_refused")
    if isinstance(err, WhatIfError):
        return FieldProblem([(["body", "what_if"], line) for line in err.lines], "value_error")
    return err


def _release(url: str, body: ReleaseRequest, parcel: Parcel) -> dict[str, Any]:
    catalog = parcel.open()
    data = body.design.model_dump(mode="json")
    draft = draft_from(body.name, data, catalog, boards=body.boards, note=body.note)
    rev = Registry.open(url=url).write(draft, source="release", who="api")
    return rev.model_dump(mode="json")


def _accept(url: str, name: str, proposal: dict[str, Any], parcel: Parcel) -> dict[str, Any]:
    rev = accept(Registry.open(url=url), name, proposal, parcel.open())
    return rev.model_dump(mode="json")


def _impact(
    active: list[RevisionOut],
    parcel: Parcel,
    settings: ImpactSettings,
    changes: list[StockChange],
) -> dict[str, Any]:
    catalog = parcel.open()
    overrides = apply_what_if(catalog, changes) if changes else None
    return impact(active, catalog, settings, overrides).model_dump(mode="json")


@router.post(
    "/designs",
    status_code=201,
    response_model=RevisionOut,
    responses=_WRITE_ERRORS,
    summary="Release a design: store it as the next revision of its name",
    description="The same as `tristock release`. The design is checked against its spec "
    "first (422 with the reasons when it fails). Needs the write token.",
    dependencies=[Depends(require_writer)],
)
async def post_design_release(
    body: ReleaseRequest, registry: RegistryDep, catalog: CatalogDep, slots: SlotsDep
) -> StrictJSON:
    try:
        data = await slots.run(_release, registry.url, body, slots.parcel(catalog))
    except Exception as err:
        raise _failures(err) from None
    return answer(data, status_code=201)


@router.get(
    "/designs",
    response_model=list[DesignSummary],
    responses=_READ_ERRORS,
    summary="Released designs with their latest revision",
)
def get_designs(
    registry: RegistryDep,
    include_retired: Annotated[bool, Query(alias="all", description="retired designs too")] = False,
) -> StrictJSON:
    try:
        rows = registry.designs(include_retired=include_retired)
    except Exception as err:
        raise _failures(err) from None
    return answer([r.model_dump(mode="json") for r in rows])


@router.get(
    "/designs/{name}",
    response_model=RevisionOut,
    responses=_READ_ERRORS,
    summary="The latest revision of a released design",
)
def get_design(name: str, registry: RegistryDep) -> StrictJSON:
    try:
        return answer(registry.revision(name).model_dump(mode="json"))
    except Exception as err:
        raise _failures(err) from None


@router.get(
    "/designs/{name}/revisions/{revision}",
    response_model=RevisionOut,
    responses=_READ_ERRORS,
    summary="One revision of a released design",
)
def get_revision(
    name: str, revision: Annotated[int, Path(ge=1, le=2**31 - 1)], registry: RegistryDep
) -> StrictJSON:
    try:
        return answer(registry.revision(name, revision).model_dump(mode="json"))
    except Exception as err:
        raise _failures(err) from None


@router.post(
    "/designs/{name}/accept",
    response_model=RevisionOut,
    responses=_WRITE_ERRORS,
    summary="Record an impact proposal's change of this design as its next revision",
    description="The same as `tristock designs accept`. Needs the write token.",
    dependencies=[Depends(require_writer)],
)
async def post_accept(
    name: str, body: AcceptRequest, registry: RegistryDep, catalog: CatalogDep, slots: SlotsDep
) -> StrictJSON:
    try:
        data = await slots.run(_accept, registry.url, name, body.proposal, slots.parcel(catalog))
    except Exception as err:
        raise _failures(err) from None
    return answer(data)


@router.post(
    "/impact",
    response_model=ImpactReport,
    responses=_WRITE_ERRORS,
    summary="Over-subscribed stock, the designs it affects, the fewest-changes proposal",
    description="The same answer as `tristock impact --json`; `what_if` changes stock in "
    "memory only. The per-design work runs on Dask as `TRISTOCK_SCHEDULER` says (default: "
    "in the compute process).",
)
async def post_impact(
    body: ImpactRequest,
    registry: RegistryDep,
    catalog: CatalogDep,
    slots: SlotsDep,
    settings: SettingsDep,
) -> StrictJSON:
    limit = min(body.time_limit_s or settings.default_time_limit_s, settings.max_time_limit_s)
    changes = [StockChange(id=c.id, stock=c.stock, delta=c.stock_delta) for c in body.what_if]
    run = ImpactSettings(top=body.top, time_limit_s=limit, joint_time_limit_s=limit)
    try:
        active = registry.active()
        data = await slots.run(_impact, active, slots.parcel(catalog), run, changes)
    except Exception as err:
        raise _failures(err) from None
    return answer(data)


def affected_designs(request: Request, catalog: Catalog, part_id: str) -> list[str] | None:
    """For the catalog PATCH answer: active designs whose planned builds the part's stock no
    longer covers together; None when the registry cannot be reached (the write stands)."""
    try:
        return affected_by(registry_of(request).active(), catalog, part_id)
    except (HTTPException, RegistryUnavailable) as err:
        log.warning("registry not consulted after a stock write: %s", err)
        return None
