"""The FastAPI app: ``create_app(settings)``, a module-level ``app`` configured from the
environment, and ``python -m api.app --write-openapi`` to refresh the committed schema.

Middleware, outermost first: catch-all (generic JSON 500, traceback in the log only), then
the body-size limit (413). Compute endpoints are plain ``def`` functions, so FastAPI runs them
in its threadpool and the event loop stays free; ``ComputeSlots`` bounds how many run at once.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
from pathlib import Path
from typing import Any

from fastapi import FastAPI

from api import errors
from api.cache import AnswerCache
from api.errors import CatchAll
from api.limits import BodyLimit, ComputeSlots
from api.routers import analysis, catalog, design, health
from api.settings import Settings
from api.store import CatalogStore
from tristock import __version__

OPENAPI_PATH = Path(__file__).with_name("openapi.json")
REGENERATE = "python -m api.app --write-openapi"


def create_app(settings: Settings) -> FastAPI:
    """A configured app. The catalog is read on the first request that needs it (and again
    whenever its files change), so building an app never fails on a bad catalog."""
    app = FastAPI(
        title="tristock",
        version=__version__,
        summary="Stock-room parts for an op-amp triangle/square oscillator",
        description="Same models and field names as the `tristock` CLI's `--json` output.",
    )
    app.state.settings = settings
    app.state.store = CatalogStore(settings.catalog_dir)
    app.state.slots = ComputeSlots(settings.max_searches, settings.search_wait_s)
    app.state.cache = AnswerCache(settings.cache_size)
    errors.install(app)
    for r in (design.router, analysis.router, catalog.router, health.router):
        app.include_router(r)
    app.add_middleware(BodyLimit, max_bytes=settings.max_body_bytes)
    app.add_middleware(CatchAll)
    return app


def app_from_env() -> FastAPI:
    """Factory for uvicorn (``--factory``): settings from the environment; the service's own
    log lines (catalog loads and reload errors) go to stderr beside uvicorn's."""
    logging.basicConfig(level=logging.INFO, format="%(levelname)s:     %(name)s: %(message)s")
    return create_app(Settings.from_env())


def openapi_document(app: FastAPI | None = None) -> dict[str, Any]:
    """The app's OpenAPI schema (independent of the catalog and the environment)."""
    if app is None:
        app = create_app(Settings(catalog_dir=Path("catalog")))
    return app.openapi()


def render_openapi(doc: dict[str, Any]) -> str:
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m api.app")
    parser.add_argument("--write-openapi", action="store_true", help=f"rewrite {OPENAPI_PATH.name}")
    args = parser.parse_args(argv)
    text = render_openapi(openapi_document())
    if args.write_openapi:
        OPENAPI_PATH.write_text(text, encoding="utf-8")
        print(f"wrote {OPENAPI_PATH}")
    else:
        sys.stdout.write(text)
    return 0


app = app_from_env()

if __name__ == "__main__":
    sys.exit(main())
