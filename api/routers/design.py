"""``POST /v1/design`` and ``POST /v1/reoptimise``: the searches, each in a compute process
(``ComputeSlots.run``); the answer is serialised there too, so the event loop only validates
the request and sends bytes."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tristock.designs import design
from tristock.designs.positions import reoptimisable
from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import DesignResult, ReoptimiseResult
from tristock.export.designfile import design_ids
from tristock.spec.model import Spec

from ..compute import Parcel
from ..deps import CacheDep, CatalogDep, SettingsDep, SlotsDep, VersionedCatalogDep
from ..errors import FieldProblem
from ..jsonout import RenderedJSON, to_json_bytes
from ..schemas import DesignRequest, Engine, ReoptimiseRequest
from ..settings import Settings
from . import COMPUTE_ERRORS

router = APIRouter(prefix="/v1", tags=["design"])


def _time_limit(settings: Settings, asked: float | None, spec: Spec) -> float:
    """The request's time limit, or the default of the spec's job, cut to the server's cap
    (seconds)."""
    if asked is None:
        tuned = spec.tuning is not None
        asked = settings.default_tuned_time_limit_s if tuned else settings.default_time_limit_s
    return min(asked, settings.max_time_limit_s)


def _check_top(settings: Settings, top: int, loc: list[str]) -> None:
    if top > settings.max_top:
        raise FieldProblem([(loc, f"at most {settings.max_top} designs per request")], "too_large")


def _headers(proven: bool) -> dict[str, str]:
    return {"X-Search": "proven-optimal" if proven else "cut-by-time-limit"}


def _designs(
    spec: Spec, parcel: Parcel, engine: Engine, limit: float, distinct: bool
) -> tuple[dict[str, Any], bytes]:
    """The search (in a compute process): the answer as data and as JSON bytes."""
    result = design(spec, parcel.open(), engine=engine, time_limit_s=limit, distinct=distinct)
    data = result.model_dump(mode="json")
    return data, to_json_bytes(data)


@router.post(
    "/design",
    operation_id="design",
    response_model=DesignResult,
    responses=COMPUTE_ERRORS,
    summary="Best designs for a spec",
    description="The same answer as `tristock design SPEC --json` (distinct designs unless "
    "`all_variants`). An infeasible spec is a 200 "
    "with `infeasible.reasons`; a search cut by its time limit has "
    "`search.proven_optimal: false` (and the header `X-Search: cut-by-time-limit`).",
)
async def post_design(
    body: DesignRequest,
    settings: SettingsDep,
    versioned: VersionedCatalogDep,
    slots: SlotsDep,
    cache: CacheDep,
) -> RenderedJSON:
    catalog, generation = versioned
    spec = body.spec
    overrides = {k: v for k, v in (("top", body.top), ("by", body.by)) if v is not None}
    if overrides:
        ranking = spec.ranking.model_copy(update=overrides)
        spec = Spec.model_validate({**spec.model_dump(), "ranking": ranking.model_dump()})
    where = ["body", "top"] if body.top is not None else ["body", "spec", "ranking", "top"]
    _check_top(settings, spec.ranking.top, where)
    limit = _time_limit(settings, body.time_limit_s, spec)
    distinct = not body.all_variants
    key = cache.key(
        "design", generation, [spec.model_dump(mode="json"), body.engine, limit, distinct]
    )
    cached = cache.get(key)
    if cached is None:
        with FieldProblem.from_value_errors(["body", "spec"]):
            data, rendered = await slots.run(
                _designs, spec, slots.parcel(catalog), body.engine, limit, distinct
            )
        if data["search"]["proven_optimal"]:  # an answer cut by time may improve on a retry
            cache.put(key, data)
        hit = "miss"
    else:
        data, rendered, hit = cached, to_json_bytes(cached), "hit"
    headers = {**_headers(data["search"]["proven_optimal"]), "X-Cache": hit}
    return RenderedJSON(rendered, headers=headers)


def _reoptimised(
    body: ReoptimiseRequest, parcel: Parcel, current: dict[str, str], limit: float
) -> tuple[dict[str, Any], bytes]:
    """The re-optimisation (in a compute process): the answer as data and as JSON bytes."""
    result = reoptimise(
        body.spec,
        parcel.open(),
        current,
        without=body.without,
        boards=body.boards,
        top=body.top,
        time_limit_s=limit,
        topology=body.topology,
    )
    data = result.model_dump(mode="json")
    return data, to_json_bytes(data)


@router.post(
    "/reoptimise",
    operation_id="reoptimise",
    response_model=ReoptimiseResult,
    responses=COMPUTE_ERRORS,
    summary="Fewest part changes that bring a design back in spec",
    description="The same answer as `tristock reoptimise DESIGN --json`.",
)
async def post_reoptimise(
    body: ReoptimiseRequest, settings: SettingsDep, catalog: CatalogDep, slots: SlotsDep
) -> RenderedJSON:
    current, _ = design_ids(body.spec, body.parts, body.topology)
    reoptimisable(body.spec, current, body.topology)  # a 422 naming the field, before any work
    top = body.top if body.top is not None else body.spec.ranking.top
    where = ["body", "top"] if body.top is not None else ["body", "spec", "ranking", "top"]
    _check_top(settings, top, where)
    limit = _time_limit(settings, body.time_limit_s, body.spec)
    with FieldProblem.from_value_errors(["body"]):
        data, rendered = await slots.run(_reoptimised, body, slots.parcel(catalog), current, limit)
    return RenderedJSON(rendered, headers=_headers(data["search"]["proven_optimal"]))
