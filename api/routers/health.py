"""``GET /health``: is a catalog loaded, which one, how big, and the last reload error."""

from __future__ import annotations

from fastapi import APIRouter

from api.deps import SettingsDep, StoreDep
from api.jsonout import StrictJSON, answer
from api.schemas import Health
from api.store import CatalogUnavailable
from tristock import __version__

router = APIRouter(tags=["service"])


@router.get(
    "/health",
    response_model=Health,
    responses={503: {"model": Health, "description": "no catalog has loaded"}},
    summary="Service and catalog status",
)
def health(store: StoreDep, settings: SettingsDep) -> StrictJSON:
    try:
        catalog = store.current()
    except CatalogUnavailable:
        catalog = None
    error = store.last_error
    counts = (
        {
            "resistors": len(catalog.resistors),
            "capacitors": len(catalog.capacitors),
            "opamps": len(catalog.opamps),
            "pots": len(catalog.pots),
        }
        if catalog is not None
        else {}
    )
    status = "unavailable" if catalog is None else ("degraded" if error else "ok")
    writes = "token" if settings.token else ("open" if settings.allow_open_writes else "disabled")
    return answer(
        {
            "status": status,
            "version": __version__,
            "catalog": str(store.directory),
            "counts": counts,
            "reloads": store.reloads,
            "loaded_at": store.loaded_at,
            "last_reload_error": list(error.errors) if error else None,
            "last_reload_error_at": error.at if error else None,
            "writes": writes,
        },
        status_code=200 if catalog is not None else 503,
    )
