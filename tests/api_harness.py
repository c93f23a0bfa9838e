"""A real ``tristock serve`` for tests and benchmark scripts: start it on a free loopback
port with chosen ``TRISTOCK_*`` settings, load it with concurrent heavy requests, and time
``/health`` and catalog reads while it is loaded.
"""

from __future__ import annotations

import asyncio
import json
import os
import signal
import socket
import subprocess
import sys
import time
import tomllib
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx

from tristock.cli import example_spec_path

START_TIMEOUT_S = 90.0


class ServerFailed(RuntimeError):
    """The server exited or did not answer in time; the message holds its log."""


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def wait_for_health(base: str, proc: subprocess.Popen[bytes], log: Path) -> None:
    deadline = time.monotonic() + START_TIMEOUT_S
    while True:
        if proc.poll() is not None:
            raise ServerFailed(f"server exited ({proc.returncode}):\n{log.read_text()}")
        try:
            if httpx.get(f"{base}/health", timeout=2).status_code == 200:
                return
        except httpx.TransportError:
            pass
        if time.monotonic() > deadline:
            raise ServerFailed(f"server did not answer in {START_TIMEOUT_S} s:\n{log.read_text()}")
        time.sleep(0.1)


def stop(proc: subprocess.Popen[bytes]) -> None:
    if proc.poll() is None:
        proc.send_signal(signal.SIGINT)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


@contextmanager
def server(
    catalog: Path,
    log: Path,
    *args: str,
    env: dict[str, str] | None = None,
    port: int | None = None,
) -> Iterator[tuple[subprocess.Popen[bytes], str]]:
    """``tristock serve`` on loopback with only the given ``TRISTOCK_*`` variables; yields
    (process, base URL) once ``/health`` answers, and stops it afterwards."""
    port = free_port() if port is None else port
    environ = {k: v for k, v in os.environ.items() if not k.upper().startswith("TRISTOCK_")}
    environ.update(env or {})
    cmd = [sys.executable, "-m", "tristock.cli", "serve", "--port", str(port)]
    with log.open("wb") as out:
        proc = subprocess.Popen(
            [*cmd, "--catalog", str(catalog), *args],
            stdout=out,
            stderr=subprocess.STDOUT,
            env=environ,
        )
    base = f"http://127.0.0.1:{port}"
    try:
        wait_for_health(base, proc, log)
        yield proc, base
    finally:
        stop(proc)


def demo_design_body(n: int, top: int | None = None) -> dict[str, Any]:
    """The bundled demo spec with its target moved by n·3 ppm: every n a distinct request, so
    none is answered from the answer cache (a cold search and full-model re-check)."""
    spec = tomllib.loads(example_spec_path().read_text(encoding="utf-8"))
    spec["frequency"]["target_hz"] *= 1 + 3e-6 * n
    return {"spec": spec} if top is None else {"spec": spec, "top": top}


@dataclass
class Saturation:
    """What happened while ``clients`` heavy requests were kept in flight."""

    clients: int
    seconds: float
    heavy_codes: dict[str, int] = field(default_factory=dict)
    health_ms: list[float] = field(default_factory=list)
    catalog_ms: list[float] = field(default_factory=list)
    compute_seen: list[dict[str, int]] = field(default_factory=list)


async def _heavy_client(
    http: httpx.AsyncClient, first: int, stop_at: float, top: int | None, codes: dict[str, int]
) -> None:
    n = first
    while time.monotonic() < stop_at:
        try:
            body = demo_design_body(n, top)
            code = str((await http.post("/v1/design", json=body)).status_code)
        except httpx.HTTPError as err:
            code = type(err).__name__
        codes[code] = codes.get(code, 0) + 1
        n += 100_000


async def _load(base: str, clients: int, seconds: float, top: int | None) -> dict[str, int]:
    codes: dict[str, int] = {}
    stop_at = time.monotonic() + seconds
    limits = httpx.Limits(max_connections=clients, max_keepalive_connections=clients)
    async with httpx.AsyncClient(base_url=base, timeout=300, limits=limits) as http:
        await asyncio.gather(*(_heavy_client(http, i, stop_at, top, codes) for i in range(clients)))
    return codes


def _probe(base: str, stop_at: float, every_s: float, out: Saturation) -> None:
    """Time ``/health`` and a catalog page, each on a new connection, every ``every_s``."""
    while time.monotonic() < stop_at:
        with httpx.Client(base_url=base, timeout=60) as http:
            t0 = time.perf_counter()
            health = http.get("/health")
            out.health_ms.append((time.perf_counter() - t0) * 1000)
            out.compute_seen.append(health.json()["compute"])
        with httpx.Client(base_url=base, timeout=60) as http:
            t0 = time.perf_counter()
            http.get("/v1/catalog/resistors", params={"limit": 50}).raise_for_status()
            out.catalog_ms.append((time.perf_counter() - t0) * 1000)
        time.sleep(every_s)


def saturate(
    base: str,
    clients: int,
    seconds: float,
    ramp_s: float = 3.0,
    every_s: float = 0.2,
    top: int | None = None,
) -> Saturation:
    """Keep ``clients`` cold design requests (the demo spec, ``top`` designs) in flight for
    ``seconds`` (each client sends its next as soon as one is answered; from a separate
    process, so the probe does not share its interpreter) and probe ``/health`` and a catalog
    read meanwhile, from ``ramp_s`` on."""
    out = Saturation(clients, seconds)
    load = subprocess.Popen(
        [sys.executable, __file__, base, str(clients), str(seconds), str(top or 0)],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        time.sleep(ramp_s)
        _probe(base, time.monotonic() + seconds - ramp_s, every_s, out)
        stdout, _ = load.communicate(timeout=seconds + 600)
    finally:
        if load.poll() is None:
            load.kill()
            load.wait()
    out.heavy_codes = json.loads(stdout.strip().splitlines()[-1])
    return out


def percentile(values: list[float], q: float) -> float:
    """Nearest-rank percentile (common practice), q in [0, 100]."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(q / 100 * len(ordered) + 0.5)))
    return ordered[rank - 1]


if __name__ == "__main__":
    # The load half of saturate(): BASE CLIENTS SECONDS TOP; prints the answer codes as JSON.
    base, clients, seconds, top = sys.argv[1], int(sys.argv[2]), float(sys.argv[3]), sys.argv[4]
    codes = asyncio.run(_load(base, clients, seconds, int(top) or None))
    print(json.dumps(codes))
