"""Connection guards for ``tristock serve`` (uvicorn, h11).

- :class:`DeadlineH11Protocol`: a connection must deliver a complete request (headers and
  body) within ``request_timeout_s`` of opening or of its previous answer; otherwise it is
  closed, after a 408 problem when part of a request had arrived (and no answer is under
  way). uvicorn's ``timeout_keep_alive``
  only covers idle connections between requests, not a request that stops half way.
  Malformed HTTP gets a 400 problem instead of uvicorn's plain text.
- :func:`watch_supervisor`: a worker whose supervisor died (``kill -9``) stops serving
  instead of holding the port as an orphan.
"""

from __future__ import annotations

import asyncio
import functools
import logging
import multiprocessing
import multiprocessing.connection
import os
import signal
import socket
import threading
import time
from http import HTTPStatus
from typing import Any

import h11
from uvicorn.protocols.http.h11_impl import H11Protocol

from .errors import PROBLEM_JSON, problem_body
from .jsonout import to_json_bytes
from .settings import Settings

log = logging.getLogger("tristock.api")

#: After a supervisor is gone: seconds beyond the graceful shutdown before a hard exit.
HARD_EXIT_MARGIN_S = 10.0


@functools.lru_cache(maxsize=1)
def _request_timeout_s() -> float:
    return Settings.from_env().request_timeout_s


def _raw_problem(status: int, detail: str) -> bytes:
    """A complete HTTP/1.1 problem answer that closes the connection."""
    body = to_json_bytes(problem_body(status, detail))
    head = (
        f"HTTP/1.1 {status} {HTTPStatus(status).phrase}\r\n"
        f"content-type: {PROBLEM_JSON}\r\n"
        f"content-length: {len(body)}\r\n"
        "connection: close\r\n\r\n"
    )
    return head.encode("ascii") + body


def set_nodelay(transport: asyncio.BaseTransport) -> None:
    """Send each response at once (TCP_NODELAY) on a TCP connection.

    asyncio sets the option only on sockets whose protocol number is IPPROTO_TCP; with
    ``--workers`` > 1 uvicorn binds its listening socket with protocol 0, so accepted
    connections inherit 0 and a response's last segment waited for the client's delayed ACK
    (about 40 ms per request on Linux loopback)."""
    sock = transport.get_extra_info("socket")
    if sock is not None and sock.family in (socket.AF_INET, socket.AF_INET6):
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)


class DeadlineH11Protocol(H11Protocol):
    """uvicorn's h11 protocol with a deadline for each request (see the module docstring)."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.request_timeout_s = _request_timeout_s()
        self._deadline: asyncio.TimerHandle | None = None

    def connection_made(self, transport: asyncio.Transport) -> None:  # type: ignore[override]
        set_nodelay(transport)
        super().connection_made(transport)
        self._arm()

    def data_received(self, data: bytes) -> None:
        super().data_received(data)
        if self.conn.their_state not in (h11.IDLE, h11.SEND_BODY):
            self._disarm()  # the request is complete (or the connection is ending)

    def on_response_complete(self) -> None:
        super().on_response_complete()
        if not self.transport.is_closing():
            self._arm()  # the next request on this connection gets its own deadline

    def connection_lost(self, exc: Exception | None) -> None:
        self._disarm()
        super().connection_lost(exc)

    def send_400_response(self, msg: str) -> None:
        self.transport.write(_raw_problem(400, msg))
        self.transport.close()

    def _arm(self) -> None:
        self._disarm()
        self._deadline = self.loop.call_later(self.request_timeout_s, self._expired)

    def _disarm(self) -> None:
        if self._deadline is not None:
            self._deadline.cancel()
            self._deadline = None

    def _expired(self) -> None:
        self._deadline = None
        if self.transport.is_closing() or self.conn.their_state not in (h11.IDLE, h11.SEND_BODY):
            return  # a complete request is being answered: not ours to cut
        cycle = self.cycle
        answering = cycle is not None and cycle.response_started and not cycle.response_complete
        started = self.conn.their_state is h11.SEND_BODY or bool(self.conn.trailing_data[0])
        if started and not answering:
            # a request began and stalled: say so (an idle connection just closes, as
            # keep-alive does, so a client sending on it at that moment is not confused)
            detail = f"no complete request within {self.request_timeout_s:g} s; closing"
            self.transport.write(_raw_problem(408, detail))
            peer = f"{self.client[0]}:{self.client[1]}" if self.client else "a client"
            log.info("closed the connection of %s: request incomplete in time", peer)
        self.transport.close()


def watch_supervisor(grace_s: float) -> threading.Thread | None:
    """In a worker started by a supervisor (``multiprocessing``): when the supervisor dies,
    stop serving (SIGTERM to this process: uvicorn's graceful shutdown, which closes the
    listening socket at once), and exit hard ``grace_s`` + a margin later if still alive.
    Returns the watching thread, or None when this process has no supervisor."""
    parent = multiprocessing.parent_process()
    if parent is None or parent.sentinel is None:
        return None
    sentinel = parent.sentinel

    def watch() -> None:
        multiprocessing.connection.wait([sentinel])
        log.warning("supervisor (pid %s) is gone; this worker stops serving", parent.pid)
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(grace_s + HARD_EXIT_MARGIN_S)
        os._exit(1)

    thread = threading.Thread(target=watch, name="tristock-supervisor-watch", daemon=True)
    thread.start()
    return thread
