"""How errors become answers: field paths for validation, a message for the rest, and never
a traceback.

- request validation (pydantic) and the library's ``SpecError`` lines -> 422
  ``{"detail": [{"loc": [...], "field": "a.b", "msg": ..., "type": ...}]}``
- ``CatalogUnavailable`` -> 503; ``HTTPException`` -> its status with ``{"detail": message}``
- anything else -> logged with its traceback, answered 500 ``{"detail": "internal error"}``
"""

from __future__ import annotations

import logging
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from api.store import CatalogUnavailable
from tristock.spec import SpecError

log = logging.getLogger("tristock.api")


class FieldProblem(Exception):
    """Raised by a router for a request that passed the schema but breaks a server limit or
    the library's own checks: answered 422 with each ``(loc, message)``."""

    def __init__(self, problems: Sequence[tuple[Sequence[str | int], str]], kind: str) -> None:
        self.problems = [(list(loc), msg) for loc, msg in problems]
        self.kind = kind
        super().__init__("; ".join(msg for _, msg in self.problems))

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


def unprocessable(items: Iterable[dict[str, Any]]) -> JSONResponse:
    return JSONResponse(status_code=422, content={"detail": list(items)})


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


def install(app: FastAPI) -> None:
    """Register the handlers above on ``app``."""

    async def on_validation(_: Request, err: Exception) -> JSONResponse:
        assert isinstance(err, RequestValidationError)
        return unprocessable(_validation_items(err))

    async def on_spec_error(_: Request, err: Exception) -> JSONResponse:
        assert isinstance(err, SpecError)
        return unprocessable(spec_error_items(err))

    async def on_field_problem(_: Request, err: Exception) -> JSONResponse:
        assert isinstance(err, FieldProblem)
        return unprocessable(field_error(loc, msg, err.kind) for loc, msg in err.problems)

    async def on_unavailable(_: Request, err: Exception) -> JSONResponse:
        return JSONResponse(status_code=503, content={"detail": str(err)})

    app.add_exception_handler(RequestValidationError, on_validation)
    app.add_exception_handler(SpecError, on_spec_error)
    app.add_exception_handler(FieldProblem, on_field_problem)
    app.add_exception_handler(CatalogUnavailable, on_unavailable)


class CatchAll:
    """ASGI middleware: an exception that escapes the app is logged (with its traceback, in
    the server log only) and answered with a generic JSON 500, if nothing was sent yet."""

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
            response = JSONResponse(status_code=500, content={"detail": "internal error"})
            await response(scope, receive, send)
