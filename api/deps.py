"""What routers take from the app: settings, the current catalog, compute slots, write auth."""

from __future__ import annotations

import hmac
from typing import Annotated

from fastapi import Depends, HTTPException, Request
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer

from api.cache import AnswerCache
from api.limits import ComputeSlots
from api.settings import Settings
from api.store import CatalogStore
from tristock.catalog import Catalog

_bearer = HTTPBearer(auto_error=False, description="TRISTOCK_TOKEN, when the server has one")


def settings_of(request: Request) -> Settings:
    settings: Settings = request.app.state.settings
    return settings


def store_of(request: Request) -> CatalogStore:
    store: CatalogStore = request.app.state.store
    return store


def catalog_of(request: Request) -> Catalog:
    """The current catalog (reloaded first if its files changed); 503 if none has loaded."""
    return store_of(request).current()


def versioned_catalog_of(request: Request) -> tuple[Catalog, int]:
    """The current catalog and its generation (for cache keys)."""
    return store_of(request).current_versioned()


def cache_of(request: Request) -> AnswerCache:
    cache: AnswerCache = request.app.state.cache
    return cache


def slots_of(request: Request) -> ComputeSlots:
    slots: ComputeSlots = request.app.state.slots
    return slots


def require_writer(
    request: Request,
    credentials: Annotated[HTTPAuthorizationCredentials | None, Depends(_bearer)],
) -> None:
    """Stock writes: a matching bearer token when one is configured (401 without, 403 with a
    wrong one); with no token configured, refused (403) unless open writes were allowed."""
    settings = settings_of(request)
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
