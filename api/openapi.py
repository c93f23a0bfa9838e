"""The app's OpenAPI document: FastAPI's, with every error answer declared as
``application/problem+json`` (the 422s as ``ValidationProblem``) and the response headers
the API sets (``X-Search``, ``X-Cache``, ``X-Catalog``, ``ETag``, ``Retry-After``) declared
where they appear. ``install(app)`` makes ``app.openapi()`` return it.
"""

from __future__ import annotations

import json
from typing import Any

from fastapi import FastAPI

from .errors import PROBLEM_JSON

_REF = "#/components/schemas/"
_PROBLEM_SCHEMAS = ("Problem", "ValidationProblem")
_FASTAPI_422 = ("HTTPValidationError", "ValidationError")

HEADERS: dict[str, dict[str, Any]] = {
    "X-Search": {
        "description": "`proven-optimal`, or `cut-by-time-limit`: the search stopped at its "
        "time limit and the answer is the best found, not proven optimal",
        "schema": {"type": "string", "enum": ["proven-optimal", "cut-by-time-limit"]},
    },
    "X-Cache": {
        "description": "`hit`: answered from this worker's cache of proven answers for the "
        "same request on the same catalog files; `miss`: searched",
        "schema": {"type": "string", "enum": ["hit", "miss"]},
    },
    "X-Catalog": {
        "description": "`stale`: answered from the last good catalog because the table "
        "files on disk fail validation now (`/health` gives the errors); absent otherwise",
        "schema": {"type": "string", "enum": ["stale"]},
    },
    "ETag": {
        "description": "version of this part's row; send it in `If-Match` to update only "
        "that version",
        "schema": {"type": "string"},
    },
    "Retry-After": {
        "description": "seconds to wait before retrying (sent when every compute slot is busy)",
        "schema": {"type": "integer", "minimum": 0},
    },
}

#: (method, path) -> headers of its 200 answer: name -> always present.
SUCCESS_HEADERS: dict[tuple[str, str], dict[str, bool]] = {
    ("post", "/v1/design"): {"X-Search": True, "X-Cache": True},
    ("post", "/v1/reoptimise"): {"X-Search": True},
    ("get", "/v1/catalog/{kind}/{part_id}"): {"ETag": False},
    ("patch", "/v1/catalog/{kind}/{part_id}"): {"ETag": False},
}


def _header(name: str, required: bool) -> dict[str, Any]:
    return {**HEADERS[name], "required": required}


def _is_problem(media: dict[str, Any]) -> bool:
    ref = str(media.get("schema", {}).get("$ref", ""))
    return ref.removeprefix(_REF) in (*_PROBLEM_SCHEMAS, *_FASTAPI_422)


def _refine_response(method: str, path: str, code: str, response: dict[str, Any]) -> None:
    content = response.get("content", {})
    media = content.get("application/json")
    if code[0] in "45" and media is not None and _is_problem(media):
        if media["schema"]["$ref"] == _REF + "HTTPValidationError":
            media["schema"] = {"$ref": _REF + "ValidationProblem"}
        content[PROBLEM_JSON] = content.pop("application/json")
    headers: dict[str, Any] = {}
    if code == "503":
        headers["Retry-After"] = _header("Retry-After", False)
    if code == "200":
        if path.startswith("/v1/"):
            headers["X-Catalog"] = _header("X-Catalog", False)
        for name, always in SUCCESS_HEADERS.get((method, path), {}).items():
            headers[name] = _header(name, always)
    if headers:
        response["headers"] = {**response.get("headers", {}), **headers}


def refine(doc: dict[str, Any]) -> dict[str, Any]:
    """``doc`` with problem+json errors and declared headers (changed in place)."""
    for path, operations in doc.get("paths", {}).items():
        for method, operation in operations.items():
            for code, response in operation.get("responses", {}).items():
                _refine_response(method, path, str(code), response)
    schemas = doc.get("components", {}).get("schemas", {})
    for name in _FASTAPI_422:  # FastAPI's own 422 shape, now unused
        schemas.pop(name, None)
    text = json.dumps(doc)
    missing = [n for n in _FASTAPI_422 if f'"{_REF}{n}"' in text]
    if missing:
        raise RuntimeError(f"OpenAPI still refers to {missing}")
    return doc


def install(app: FastAPI) -> None:
    """Make ``app.openapi()`` return the refined document (built once, then cached)."""
    build = app.openapi
    cached: list[dict[str, Any]] = []

    def openapi() -> dict[str, Any]:
        if not cached:
            cached.append(refine(build()))
        return cached[0]

    app.openapi = openapi  # type: ignore[method-assign]
