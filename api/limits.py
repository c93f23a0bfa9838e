"""Request limits: body size (413), concurrent CPU-bound work (503), capped parameters.

Bodies are read in full before the app sees them (at most ``max_bytes`` + one chunk is held),
so a body without Content-Length is bounded too.
"""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager

from fastapi import HTTPException
from fastapi.responses import JSONResponse
from starlette.types import ASGIApp, Message, Receive, Scope, Send


class BodyLimit:
    """ASGI middleware: answer 413 to a request body larger than ``max_bytes``."""

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def _refuse(self, scope: Scope, receive: Receive, send: Send, status: int) -> None:
        detail = (
            f"request body larger than {self.max_bytes} bytes"
            if status == 413
            else "bad Content-Length header"
        )
        await JSONResponse(status_code=status, content={"detail": detail})(scope, receive, send)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope.get("headers", ()):
            if name == b"content-length":
                try:
                    declared = int(value)
                except ValueError:
                    await self._refuse(scope, receive, send, 400)
                    return
                if declared > self.max_bytes:
                    await self._refuse(scope, receive, send, 413)
                    return
        chunks: list[bytes] = []
        size = 0
        first: Message | None = None
        while True:
            message = await receive()
            if message["type"] != "http.request":
                first = message  # a disconnect: hand it on as it came
                break
            body = message.get("body", b"")
            size += len(body)
            if size > self.max_bytes:
                await self._refuse(scope, receive, send, 413)
                return
            chunks.append(body)
            if not message.get("more_body", False):
                break
        replayed = False

        async def replay() -> Message:
            nonlocal replayed
            if not replayed:
                replayed = True
                if first is not None:
                    return first
                return {"type": "http.request", "body": b"".join(chunks), "more_body": False}
            return await receive()

        await self.app(scope, replay, send)


class ComputeSlots:
    """At most ``slots`` CPU-bound requests at once; a request waits up to ``wait_s`` for a
    slot, then is refused with 503 and ``Retry-After``."""

    def __init__(self, slots: int, wait_s: float) -> None:
        self._sem = threading.BoundedSemaphore(slots)
        self.slots = slots
        self.wait_s = wait_s

    @contextmanager
    def slot(self) -> Iterator[None]:
        if not self._sem.acquire(timeout=self.wait_s):
            raise HTTPException(
                status_code=503,
                detail=f"all {self.slots} search slots are busy; retry shortly",
                headers={"Retry-After": "1"},
            )
        try:
            yield
        finally:
            self._sem.release()
