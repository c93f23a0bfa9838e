"""Every accepted connection sends without waiting (TCP_NODELAY), whatever socket uvicorn binds.

With ``--workers`` > 1 uvicorn binds the listening socket itself with protocol number 0, and
asyncio then leaves TCP_NODELAY off on accepted connections, so each response waited for the
client's delayed ACK (Linux loopback, ~40 ms: measured with tests/benchmark_api.py). The
socket here is bound by uvicorn's own ``Config.bind_socket``, as its supervisor binds it.
"""

from __future__ import annotations

import asyncio
import socket

from tristock.api.connections import set_nodelay
from uvicorn.config import Config


async def _nodelay_of_accepted(sock: socket.socket, *, ours: bool) -> int:
    accepted: asyncio.Future[int] = asyncio.get_running_loop().create_future()

    class Probe(asyncio.Protocol):
        def connection_made(self, transport: asyncio.BaseTransport) -> None:
            if ours:
                set_nodelay(transport)
            raw = transport.get_extra_info("socket")
            accepted.set_result(raw.getsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY))
            transport.close()

    server = await asyncio.get_running_loop().create_server(Probe, sock=sock)
    host, port = sock.getsockname()[:2]
    _, writer = await asyncio.open_connection(host, port)
    try:
        return await asyncio.wait_for(accepted, 5)
    finally:
        writer.close()
        server.close()
        await server.wait_closed()


def _bound_like_uvicorns_supervisor() -> socket.socket:
    return Config("tristock.api.app:app_from_env", host="127.0.0.1", port=0).bind_socket()


def _bound_with_protocol_zero() -> socket.socket:
    """A listening socket made as uvicorn's supervisor made it before 0.55 (protocol 0)."""
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.bind(("127.0.0.1", 0))
    return sock


def test_asyncio_leaves_nodelay_off_on_a_protocol_zero_socket() -> None:
    """The premise: asyncio sets the option only on sockets whose protocol is TCP, so on a
    socket bound with protocol 0 it stays off without our hook (if asyncio ever sets it,
    this fails and the hook can go). Newer uvicorn binds with protocol 6 (TCP) and asyncio
    then sets it itself; the hook keeps every version and worker count alike."""
    sock = _bound_with_protocol_zero()
    assert sock.proto == 0
    assert asyncio.run(_nodelay_of_accepted(sock, ours=False)) == 0
    assert asyncio.run(_nodelay_of_accepted(_bound_with_protocol_zero(), ours=True)) != 0


def test_the_connection_protocol_turns_nodelay_on() -> None:
    assert asyncio.run(_nodelay_of_accepted(_bound_like_uvicorns_supervisor(), ours=True)) != 0
