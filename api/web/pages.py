"""``GET /``: the workbench page (one document, its views switched by the script), and
``GET /docs``: the OpenAPI docs page on the vendored Swagger UI.

Both answers carry a Content-Security-Policy that allows this origin only: a page that tried
to load anything from elsewhere would be stopped by the browser and the attempt reported.
"""

from __future__ import annotations

import importlib.util
import json
import tomllib
from functools import cache
from pathlib import Path
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse
from fastapi.templating import Jinja2Templates

from tristock import __version__
from tristock.circuits import TOPOLOGIES
from tristock.examples import EXAMPLES, example_spec_path

from .specform import form_kinds_json, spec_form

router = APIRouter(include_in_schema=False)
templates = Jinja2Templates(directory=Path(__file__).with_name("templates"))

#: Same origin only. Inline style attributes are allowed (matplotlib's SVG and Swagger UI
#: use them); scripts only from files of this origin.
CSP = (
    "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
    "img-src 'self' data: blob:; connect-src 'self'; object-src 'none'; base-uri 'none'; "
    "form-action 'self'; frame-ancestors 'none'"
)
PAGE_HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-cache",
}


def swagger_dir() -> Path:
    """The folder of the vendored Swagger UI 5 (the ``swagger-ui-py`` package's ``static``),
    found without importing the package (its ``__init__`` loads web-framework adapters).

    Swagger UI 5 because FastAPI writes OpenAPI 3.1, which Swagger UI 4 (the
    ``swagger-ui-bundle`` package) refuses to render."""
    spec = importlib.util.find_spec("swagger_ui")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError("the swagger-ui-py package is not installed")
    return Path(next(iter(spec.submodule_search_locations))) / "static"


@cache
def examples_json() -> str:
    """The bundled example specs as they are written in their TOML files, by name."""
    data: dict[str, Any] = {
        name: tomllib.loads(example_spec_path(name).read_text(encoding="utf-8"))
        for name in EXAMPLES
    }
    return json.dumps(data, separators=(",", ":"))


def sketches_json() -> str:
    """Every topology's ASCII sketch, by topology name."""
    return json.dumps({name: t.sketch for name, t in TOPOLOGIES.items()})


@router.get("/", response_class=HTMLResponse)
def workbench(request: Request) -> HTMLResponse:
    context = {
        "version": __version__,
        "sections": spec_form(),
        "examples": EXAMPLES,
        "examples_json": examples_json(),
        "kinds_json": form_kinds_json(),
        "sketches_json": sketches_json(),
        "default_topology": next(iter(TOPOLOGIES)),
    }
    response = templates.TemplateResponse(request, "index.html", context)
    response.headers.update(PAGE_HEADERS)
    return response


@router.get("/docs", response_class=HTMLResponse)
def docs(request: Request) -> HTMLResponse:
    response = templates.TemplateResponse(request, "docs.html", {"version": __version__})
    response.headers.update(PAGE_HEADERS)
    return response
