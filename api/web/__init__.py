"""The browser workbench at ``/``: server-rendered pages (Jinja2), one hand-written script
and a style sheet (``static/``), SVG figures drawn on the server (``figures``), and the
OpenAPI docs page on vendored Swagger UI 5 (the ``swagger-ui-py`` package's files). Nothing the
pages load comes from another origin.

The pages call the JSON API (``/v1/...``) from the script, so they show exactly what the API
answers; the few routes here under ``/ui`` only draw figures and convert spec and DESIGN files
between JSON and TOML, calling the library as the API's routers do. They are left out of the
OpenAPI schema (they are the page's, not the API's).
"""

from __future__ import annotations

from pathlib import Path

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles

from .figures import COMPUTE_PATHS
from .figures import router as figures_router
from .pages import router as pages_router
from .pages import swagger_dir

STATIC_DIR = Path(__file__).with_name("static")

__all__ = ["COMPUTE_PATHS", "install"]


def install(app: FastAPI) -> None:
    """Add the pages, the figure routes and the static files to ``app``."""
    app.include_router(pages_router)
    app.include_router(figures_router)
    app.mount("/ui/static", StaticFiles(directory=STATIC_DIR), name="ui-static")
    app.mount("/ui/swagger", StaticFiles(directory=swagger_dir()), name="ui-swagger")
