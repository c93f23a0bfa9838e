"""Every error is one shape: RFC 9457 problem details, ``application/problem+json``.

    {"type": "about:blank", "title": "Not Found", "status": 404,
     "detail": "no part with id 'X' in resistors", "instance": "/v1/catalog/resistors/X"}

``type`` is ``about:blank`` when the status code says it all (the title is then the status
phrase, as RFC 9457 section 4.2.1 asks), otherwise one of :data:`PROBLEM_TYPES`, each served as
documentation at ``/problems/{name}``. A 422 (``invalid-request``) keeps every field path in
the extension member ``errors``: ``[{"loc": [...], "field": "a.b", "msg": ..., "type": ...}]``.

- request validation (pydantic), the library's ``SpecError`` lines and :class:`FieldProblem`
  -> 422 ``invalid-request``
- ``CatalogUnavailable`` -> 503 ``catalog-unavailable``; :class:`ServiceProblem` -> its own
- ``HTTPException`` (and Starlette's 404/405) -> its status and headers; a 405's ``Allow``
  lists every method of the path
- anything else -> logged with its traceback, answered 500 ``detail: "internal error"``
"""

from __future__ import annotations

import http
import logging
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import Response
from starlette.routing import compile_path
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from tristock.spec.loading import SpecError

from .jsonout import to_json_bytes
from .store import CatalogUnavailable

log = logging.getLogger("tristock.api")

PROBLEM_JSON = "application/problem+json"
#: At most this many field problems are repeated in a 422's one-line ``detail``.
DETAIL_ITEMS = 3


@dataclass(frozen=True, slots=True)
class ProblemType:
    """A problem type of this API: its status, title and what a client should do."""

    name: str
    status: int
    title: str
    description: str

    @property
    def uri(self) -> str:
        return f"/problems/{self.name}"


PROBLEM_TYPES: dict[str, ProblemType] = {
    t.name: t
    for t in (
        ProblemType(
            "invalid-request",
            422,
            "Invalid request",
            "The body or query failed validation, a server limit or the library's checks. "
            "`errors` lists every problem: `loc` (path), `field` (dotted, without the first "
            "element), `msg` and `type`. Fix the fields named; do not retry unchanged.",
        ),
        ProblemType(
            "busy",
            503,
            "All compute slots are busy",
            "Every compute slot of the worker stayed busy for the server's wait. Retry after "
            "the `Retry-After` seconds.",
        ),
        ProblemType(
            "catalog-unavailable",
            503,
            "No catalog is available",
            "No catalog has loaded since the server started (the reasons are in `detail` and "
            "at `/health`). Fix the part tables; the next request reloads them.",
        ),
    )
}


class ServiceProblem(Exception):
    """An error answer with a status, a problem type name (None: ``about:blank``), a detail
    for a person and optional headers."""

    def __init__(
        self,
        status: int,
        type_name: str | None,
        detail: str,
        headers: Mapping[str, str] | None = None,
    ) -> None:
        self.status = status
        self.type_name = type_name
        self.detail = detail
        self.headers = dict(headers or {})
        super().__init__(detail)


class ProblemJSON(Response):
    """A problem details body (compact UTF-8 JSON; non-finite numbers as null)."""

    media_type = PROBLEM_JSON

    def render(self, content: Any) -> bytes:
        return to_json_bytes(content)


def problem_body(
    status: int,
    detail: str,
    *,
    type_name: str | None = None,
    instance: str | None = None,
    **extensions: Any,
) -> dict[str, Any]:
    """The problem object: ``about:blank`` with the status phrase as title, or a named type."""
    if type_name is None:
        kind, title = "about:blank", _phrase(status)
    else:
        known = PROBLEM_TYPES[type_name]
        kind, title = known.uri, known.title
    body: dict[str, Any] = {"type": kind, "title": title, "status": status, "detail": detail}
    if instance:
        body["instance"] = instance
    return {**body, **extensions}


def problem_response(
    status: int,
    detail: str,
    *,
    type_name: str | None = None,
    instance: str | None = None,
    headers: Mapping[str, str] | None = None,
    **extensions: Any,
) -> ProblemJSON:
    body = problem_body(status, detail, type_name=type_name, instance=instance, **extensions)
    return ProblemJSON(content=body, status_code=status, headers=dict(headers or {}))


def _phrase(status: int) -> str:
    try:
        return http.HTTPStatus(status).phrase
    except ValueError:
        return "Error"


class FieldProblem(Exception):
    """Raised by a router for a request that passed the schema but breaks a server limit or
    the library's own checks: answered 422 with each ``(loc, message)``."""

    def __init__(self, problems: Sequence[tuple[Sequence[str | int], str]], kind: str) -> None:
        self.problems = [(list(loc), msg) for loc, msg in problems]
        self.kind = kind
        super().__init__("; ".join(msg for _, msg in self.problems))

    def __reduce__(self) -> tuple[type[FieldProblem], tuple[Any, ...]]:
        return FieldProblem, (self.problems, self.kind)  # survives a trip from a process

    @staticmethod
    @contextmanager
    def from_value_errors(loc: Sequence[str | int]) -> Iterator[None]:
        """Inside: a ValueError from the library (its way of rejecting an input the schema
        let through) becomes a 422 at ``loc``; ``SpecError`` keeps its own field paths."""
        try:
            yield
        except SpecError:
            raise
        except ValueError as err:
            log.warning("library rejected a request: %s", err, exc_info=True)
            raise FieldProblem([(loc, str(err))], "value_error") from None


def field_error(loc: Sequence[str | int], msg: str, kind: str) -> dict[str, Any]:
    """One 422 item: ``loc`` as FastAPI gives it, ``field`` dotted without the first part."""
    path = [p if isinstance(p, int) else str(p) for p in loc]
    dotted = ".".join(str(p) for p in path[1:])
    return {
        "loc": path,
        "field": dotted or (str(path[0]) if path else ""),
        "msg": msg,
        "type": kind,
    }


def spec_error_items(err: SpecError, root: Sequence[str] = ("body",)) -> list[dict[str, Any]]:
    """The library's ``"field.path: reason"`` lines as 422 items under ``root``."""
    items = []
    for line in err.lines:
        path, sep, msg = line.partition(": ")
        if not sep:
            path, msg = "", line
        loc: list[str | int] = [*root]
        for part in path.split(".") if path else []:
            loc.append(int(part) if part.isdigit() else part)
        items.append(field_error(loc, msg, "value_error"))
    return items


def unprocessable(items: Iterable[dict[str, Any]], instance: str | None = None) -> ProblemJSON:
    """A 422 ``invalid-request`` problem; ``detail`` repeats the first few items in one line."""
    errors = list(items)
    shown = [f"{e['field'] or 'request'}: {e['msg']}" for e in errors[:DETAIL_ITEMS]]
    more = len(errors) - len(shown)
    detail = "; ".join(shown) + (f"; and {more} more" if more > 0 else "")
    return problem_response(
        422, detail, type_name="invalid-request", instance=instance, errors=errors
    )


def _validation_items(err: RequestValidationError) -> list[dict[str, Any]]:
    items = []
    for e in err.errors():
        msg = str(e.get("msg", "invalid")).removeprefix("Value error, ")
        kind = str(e.get("type", "value_error"))
        if kind == "extra_forbidden":
            msg = "unknown key (check the spelling)"
        loc = [p if isinstance(p, int) else str(p) for p in e.get("loc", ())]
        items.append(field_error(loc, msg, kind))
    return items


def allowed_methods(request: Request, given: str | None = None) -> list[str]:
    """Every method served at the request's path: the ``Allow`` Starlette gave (one route's
    methods) joined with every operation the OpenAPI document has for a matching path
    (FastAPI makes one route per method, so GET and PATCH of a path are separate routes)."""
    methods = {m.strip().upper() for m in (given or "").split(",") if m.strip()}
    for template, operations in request.app.openapi().get("paths", {}).items():
        if compile_path(template)[0].fullmatch(request.url.path):
            methods |= {m.upper() for m in operations}
    return sorted(methods)


def _from_http_exception(request: Request, err: StarletteHTTPException) -> ProblemJSON:
    headers = dict(err.headers or {})
    detail: Any = err.detail
    extensions: dict[str, Any] = {}
    if isinstance(detail, dict):
        extensions = {k: v for k, v in detail.items() if k not in ("type", "title", "status")}
        detail = extensions.pop("detail", _phrase(err.status_code))
    if err.status_code == 405:
        allowed = allowed_methods(request, headers.pop("Allow", None))
        headers["Allow"] = ", ".join(allowed)
        detail = f"{request.method} is not allowed here; allowed: {', '.join(allowed)}"
    elif err.status_code == 404 and detail == _phrase(404):
        detail = f"no such path: {request.url.path}"
    return problem_response(
        err.status_code, str(detail), instance=request.url.path, headers=headers, **extensions
    )


def install(app: FastAPI) -> None:
    """Register the handlers above on ``app``."""

    async def on_validation(request: Request, err: Exception) -> Response:
        assert isinstance(err, RequestValidationError)
        return unprocessable(_validation_items(err), request.url.path)

    async def on_spec_error(request: Request, err: Exception) -> Response:
        assert isinstance(err, SpecError)
        return unprocessable(spec_error_items(err), request.url.path)

    async def on_field_problem(request: Request, err: Exception) -> Response:
        assert isinstance(err, FieldProblem)
        items = (field_error(loc, msg, err.kind) for loc, msg in err.problems)
        return unprocessable(items, request.url.path)

    async def on_unavailable(request: Request, err: Exception) -> Response:
        return problem_response(
            503, str(err), type_name="catalog-unavailable", instance=request.url.path
        )

    async def on_service_problem(request: Request, err: Exception) -> Response:
        assert isinstance(err, ServiceProblem)
        return problem_response(
            err.status,
            err.detail,
            type_name=err.type_name,
            instance=request.url.path,
            headers=err.headers,
        )

    async def on_http_exception(request: Request, err: Exception) -> Response:
        assert isinstance(err, StarletteHTTPException)
        return _from_http_exception(request, err)

    app.add_exception_handler(RequestValidationError, on_validation)
    app.add_exception_handler(SpecError, on_spec_error)
    app.add_exception_handler(FieldProblem, on_field_problem)
    app.add_exception_handler(CatalogUnavailable, on_unavailable)
    app.add_exception_handler(ServiceProblem, on_service_problem)
    app.add_exception_handler(StarletteHTTPException, on_http_exception)


class CatchAll:
    """ASGI middleware: an exception that escapes the app is logged (with its traceback, in
    the server log only) and answered with a generic 500 problem, if nothing was sent yet."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        started = False

        async def tracking_send(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, receive, tracking_send)
        except Exception:
            log.exception("unhandled error in %s %s", scope.get("method"), scope.get("path"))
            if started:
                raise
            response = problem_response(500, "internal error", instance=scope.get("path"))
            await response(scope, receive, send)
