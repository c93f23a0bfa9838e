"""Request limits: body size (413), concurrent CPU-bound work (503 when busy).

Bodies are read in full before the app sees them (at most ``max_bytes`` + one chunk is held),
so a body without Content-Length is bounded too.

Compute (design, reoptimise, analyse, simulate) runs in processes of its own
(``tristock.api.compute``), at most ``slots`` at once per worker; a request waiting for a slot holds
no thread, so ``/health``, catalog reads and the FastAPI threadpool never queue behind it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, TypeVar

import anyio
from anyio.lowlevel import RunVar
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from tristock.stock.catalog import Catalog

from .compute import Parcel, ProcessPool
from .errors import ServiceProblem, problem_response

T = TypeVar("T")

#: Seconds a client is asked to wait before retrying a busy service (``Retry-After``).
RETRY_AFTER_S = 1


class ComputeBusy(ServiceProblem):
    """Every compute slot stayed busy for the whole wait: 503 with ``Retry-After``."""

    def __init__(self, slots: int, waited_s: float, queue: int) -> None:
        why = (
            f"stayed busy for {waited_s:g} s"
            if waited_s > 0
            else f"are busy and the queue is full ({queue} waiting)"
        )
        super().__init__(
            503,
            "busy",
            f"all {slots} compute slots {why}; retry shortly",
            headers={"Retry-After": str(RETRY_AFTER_S)},
        )


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
        await problem_response(status, detail, instance=scope.get("path"))(scope, receive, send)

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
        while True:
            message = await receive()
            if message["type"] != "http.request":
                return  # the client went away before its body was complete: nobody to answer
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
                return {"type": "http.request", "body": b"".join(chunks), "more_body": False}
            return await receive()

        await self.app(scope, replay, send)


class ComputeGate:
    """ASGI middleware: a compute request (``POST`` to one of ``paths``) that arrives while
    the compute queue is full is refused (503 ``busy``) before its body is parsed or
    validated, so a crowd of waiting requests costs the event loop next to nothing."""

    def __init__(self, app: ASGIApp, slots: ComputeSlots, paths: frozenset[str]) -> None:
        self.app = app
        self.slots = slots
        self.paths = paths

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if (
            scope["type"] == "http"
            and scope["method"] == "POST"
            and scope["path"] in self.paths
            and self.slots.full()
        ):
            busy = self.slots.refuse()
            response = problem_response(
                503, busy.detail, type_name="busy", instance=scope["path"], headers=busy.headers
            )
            await response(scope, receive, send)
            return
        await self.app(scope, receive, send)


@dataclass
class _LoopSlots:
    """One event loop's admission semaphore and counters."""

    admission: anyio.Semaphore
    running: int = 0
    waiting: int = 0
    refused: int = 0
    done: int = 0


class ComputeSlots:
    """At most ``slots`` compute calls at once, each in a process of a pool of ``slots``; a
    caller waits up to ``wait_s`` seconds for a slot (asynchronously, holding no thread), then
    gets :class:`ComputeBusy`.

    Admission state is kept per event loop (one per worker process when serving), so an app
    used by several test clients in turn never shares a primitive between loops.
    """

    def __init__(self, slots: int, wait_s: float, max_queue: int = 16, niceness: int = 10) -> None:
        if slots < 1 or wait_s < 0 or max_queue < 0:
            raise ValueError(
                f"need slots >= 1, wait_s and max_queue >= 0: {slots, wait_s, max_queue}"
            )
        self.slots = slots
        self.wait_s = wait_s
        self.max_queue = max_queue
        self.pool = ProcessPool(slots, niceness)
        self._state: RunVar[_LoopSlots] = RunVar("tristock.compute_slots")

    def _current(self) -> _LoopSlots:
        try:
            return self._state.get()
        except LookupError:
            state = _LoopSlots(anyio.Semaphore(self.slots))
            self._state.set(state)
            return state

    def parcel(self, catalog: Catalog) -> Parcel:
        """``catalog`` ready to send to a compute process (see ``tristock.api.compute.Parcel``)."""
        return self.pool.parcel(catalog)

    def full(self) -> bool:
        """Every slot busy and ``max_queue`` callers waiting already (in this event loop)."""
        state = self._current()
        return state.running >= self.slots and state.waiting >= self.max_queue

    def refuse(self) -> ComputeBusy:
        self._current().refused += 1
        return ComputeBusy(self.slots, 0.0, self.max_queue)

    async def _admit(self, state: _LoopSlots) -> None:
        try:
            state.admission.acquire_nowait()
            return
        except anyio.WouldBlock:
            pass
        if state.waiting >= self.max_queue:
            raise self.refuse()
        state.waiting += 1
        try:
            with anyio.move_on_after(self.wait_s) as scope:
                await state.admission.acquire()
        finally:
            state.waiting -= 1
        if scope.cancelled_caught:
            state.refused += 1
            raise ComputeBusy(self.slots, self.wait_s, self.max_queue)

    async def run(self, fn: Callable[..., T], *args: Any) -> T:
        """``fn(*args)`` in a compute process once a slot is free (``fn`` and ``args`` must
        pickle: module-level functions, pydantic models, parcels); its result or exception.
        A cancelled caller keeps the slot until the process has finished the call."""
        state = self._current()
        await self._admit(state)
        state.running += 1
        try:
            with anyio.CancelScope(shield=True):
                result = await self.pool.call(fn, *args)
            return result
        finally:
            state.running -= 1
            state.done += 1
            state.admission.release()

    def status(self) -> dict[str, int]:
        """Slots, calls running and waiting now, calls finished and refused (this worker)."""
        try:
            state = self._state.get()
        except (LookupError, RuntimeError):  # nothing run yet, or not inside an event loop
            state = _LoopSlots(anyio.Semaphore(self.slots))
        return {
            "slots": self.slots,
            "running": state.running,
            "waiting": state.waiting,
            "done": state.done,
            "refused": state.refused,
        }
