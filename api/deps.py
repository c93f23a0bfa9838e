"""What routers take from the app: settings, the current catalog, compute slots, write auth.

The cheap ones are ``async`` (they run on the event loop, never in the threadpool); the
catalog ones stat the table files and may reload them, so they stay plain functions and run
in FastAPI's threadpool, which compute never occupies (it has threads of its own).
"""

from __future__ import annotations

import hmac
from typing import Annotated

from fastapi import Depends, HTTPException, Request
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer

from tristock.stock.catalog import Catalog

from .cache import AnswerCache
from .limits import ComputeSlots
from .settings import Settings
from .store import CatalogStore

_bearer = HTTPBearer(auto_error=False, description="TRISTOCK_TOKEN, when the server has one")


async def settings_of(request: Request) -> Settings:
    settings: Settings = request.app.state.settings
    return settings


async def store_of(request: Request) -> CatalogStore:
    store: CatalogStore = request.app.state.store
    return store


def catalog_of(request: Request) -> Catalog:
    """The current catalog (reloaded first if its files changed); 503 if none has loaded."""
    store: CatalogStore = request.app.state.store
    return store.current()


def versioned_catalog_of(request: Request) -> tuple[Catalog, int]:
    """The current catalog and its generation (for cache keys)."""
    store: CatalogStore = request.app.state.store
    return store.current_versioned()


async def cache_of(request: Request) -> AnswerCache:
    cache: AnswerCache = request.app.state.cache
    return cache


async def slots_of(request: Request) -> ComputeSlots:
    slots: ComputeSlots = request.app.state.slots
    return slots


async def require_writer(
    request: Request,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Depends(_bearer)],
) -> None:
    """Stock writes: a matching bearer token when one is configured (401 without, 403 with a
    wrong one); with no token configured, refused (403) unless open writes were allowed."""
    settings: Settings = request.app.state.settings
    if settings.token is None:
        if settings.allow_open_writes:
            return
        raise HTTPException(
            status_code=403,
            detail="stock writes are disabled: the server has no TRISTOCK_TOKEN and was not "
            "started with --allow-open-writes",
        )
    if credentials is None:
        raise HTTPException(
            status_code=401,
            detail="stock writes need 'Authorization: Bearer <token>'",
            headers={"WWW-Authenticate": "Bearer"},
        )
    if not hmac.compare_digest(
        credentials.credentials.encode("utf-8"), settings.token.encode("utf-8")
    ):
        raise HTTPException(status_code=403, detail="wrong token")


SettingsDep = Annotated[Settings, Depends(settings_of)]
StoreDep = Annotated[CatalogStore, Depends(store_of)]
CatalogDep = Annotated[Catalog, Depends(catalog_of)]
SlotsDep = Annotated[ComputeSlots, Depends(slots_of)]
VersionedCatalogDep = Annotated[tuple[Catalog, int], Depends(versioned_catalog_of)]
CacheDep = Annotated[AnswerCache, Depends(cache_of)]
