"""``GET /health``: is a catalog loaded, which one, how big, the last reload error, and how
busy this worker's compute slots are.

It never waits for compute: the handler runs on the event loop and checks the catalog files
in FastAPI's threadpool, which compute does not use.
"""

from __future__ import annotations

import anyio.to_thread
from fastapi import APIRouter

from tristock import __version__
from tristock.stock.catalog import KINDS, Catalog

from ..deps import SettingsDep, SlotsDep, StoreDep
from ..jsonout import StrictJSON, answer
from ..schemas import Health
from ..store import CatalogStore, CatalogUnavailable

router = APIRouter(tags=["service"])


def _catalog_or_none(store: CatalogStore) -> Catalog | None:
    try:
        return store.current()
    except CatalogUnavailable:
        return None


@router.get(
    "/health",
    operation_id="health",
    response_model=Health,
    responses={503: {"model": Health, "description": "no catalog has loaded"}},
    summary="Service and catalog status",
)
async def health(store: StoreDep, settings: SettingsDep, slots: SlotsDep) -> StrictJSON:
    catalog = await anyio.to_thread.run_sync(_catalog_or_none, store)
    error = store.last_error
    counts = {kind: len(getattr(catalog, kind)) for kind in KINDS} if catalog is not None else {}
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
            "compute": slots.status(),
        },
        status_code=200 if catalog is not None else 503,
    )
