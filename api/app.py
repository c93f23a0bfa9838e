"""The FastAPI app: ``create_app(settings)``, the factory ``app_from_env`` that uvicorn calls
once per worker (``tristock serve``), and ``python -m tristock.api.app --write-openapi`` to
refresh the committed schema. Importing this module builds no app and configures no logging.

Middleware, outermost first: catch-all (a generic 500 problem, traceback in the log only),
the body-size limit (413), then the compute gate (503 at once when the compute queue is
full). Compute endpoints are ``async`` and run their work in
compute processes (``ComputeSlots``, ``tristock.api.compute``), so the event loop and FastAPI's
threadpool (catalog reads, ``/health``) never wait for compute.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import sys
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from pathlib import Path
from typing import Any

from fastapi import FastAPI
from fastapi.routing import APIRoute

from tristock import __version__

from . import errors, openapi
from .cache import AnswerCache
from .errors import CatchAll
from .limits import BodyLimit, ComputeGate, ComputeSlots
from .routers import analysis, catalog, design, export, health, problems, registry
from .settings import Settings
from .store import CatalogStore
from .web import COMPUTE_PATHS as PAGE_COMPUTE_PATHS
from .web import install as install_pages

log = logging.getLogger("tristock.api")

OPENAPI_PATH = Path(__file__).with_name("openapi.json")
REGENERATE = "python -m tristock.api.app --write-openapi"
#: The endpoints whose work runs in a compute slot.
#: (An accept's path holds the design's name, so the gate, which matches whole paths, does not
#: see it; its compute slot still waits and refuses like every other.)
COMPUTE_PATHS = frozenset(
    {
        "/v1/design",
        "/v1/reoptimise",
        "/v1/analyse",
        "/v1/simulate",
        "/v1/designs",
        "/v1/designs/{name}/accept",
        "/v1/impact",
        "/v1/export/bom",
        "/v1/export/spice",
    }
)


def operation_id(route: APIRoute) -> str:
    """Operation ids are the route's name: its ``operation_id`` or its function's name."""
    return route.operation_id or route.name


def create_app(settings: Settings, *, supervised: bool = False) -> FastAPI:
    """A configured app. The catalog is read on the first request that needs it (and again
    whenever its files change), so building an app never fails on a bad catalog.

    ``supervised``: the app runs in a worker process of ``tristock serve``: it starts its
    compute processes at start-up and stops serving when the worker's supervisor dies (see
    ``tristock.api.connections.watch_supervisor``)."""

    slots = ComputeSlots(
        settings.max_searches, settings.search_wait_s, settings.max_queue, settings.compute_nice
    )

    @asynccontextmanager
    async def lifespan(_: FastAPI) -> AsyncIterator[None]:
        if supervised:
            from .connections import watch_supervisor

            watch_supervisor(settings.shutdown_grace_s)
            slots.pool.warm()  # compute processes ready before the first request
        try:
            yield
        finally:
            slots.pool.shutdown()

    app = FastAPI(
        title="tristock",
        version=__version__,
        summary="Stock-room parts for an op-amp triangle/square oscillator",
        description="Same models and field names as the `tristock` CLI's `--json` output. "
        "Every error is an RFC 9457 problem (`application/problem+json`).",
        generate_unique_id_function=operation_id,
        lifespan=lifespan,
        docs_url=None,  # served by the workbench from vendored assets (api/web/pages.py)
        redoc_url=None,
    )
    app.state.settings = settings
    app.state.store = CatalogStore(settings.catalog_dir)
    app.state.slots = slots
    app.state.cache = AnswerCache(settings.cache_size)
    errors.install(app)
    routers = (
        design.router,
        analysis.router,
        export.router,
        catalog.router,
        registry.router,
        health.router,
    )
    for r in (*routers, problems.router):
        app.include_router(r)
    install_pages(app)
    app.add_middleware(ComputeGate, slots=slots, paths=COMPUTE_PATHS | PAGE_COMPUTE_PATHS)
    app.add_middleware(BodyLimit, max_bytes=settings.max_body_bytes)
    app.add_middleware(CatchAll)
    openapi.install(app)
    return app


def app_from_env() -> FastAPI:
    """Factory for uvicorn (``--factory``), called once in each worker: settings from the
    ``TRISTOCK_*`` environment (``tristock serve`` has validated them and set up logging)."""
    settings = Settings.from_env()
    app = create_app(settings, supervised=True)
    log.info("worker %d: app built (%d compute slots)", os.getpid(), settings.max_searches)
    return app


def openapi_document(app: FastAPI | None = None) -> dict[str, Any]:
    """The app's OpenAPI schema (independent of the catalog and the environment)."""
    if app is None:
        app = create_app(Settings.model_construct(catalog_dir=Path("catalog")))
    return app.openapi()


def render_openapi(doc: dict[str, Any]) -> str:
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tristock.api.app")
    parser.add_argument("--write-openapi", action="store_true", help=f"rewrite {OPENAPI_PATH.name}")
    args = parser.parse_args(argv)
    text = render_openapi(openapi_document())
    if args.write_openapi:
        OPENAPI_PATH.write_text(text, encoding="utf-8")
        print(f"wrote {OPENAPI_PATH}")
    else:
        sys.stdout.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
