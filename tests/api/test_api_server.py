"""The API as a real server process (``tristock serve`` -> uvicorn on a free 127.0.0.1 port):
concurrent stock writes lose nothing, and killing the server mid-write leaves a valid table.

Both rest on the catalog's write protocol (file lock, temporary file, fsync, atomic rename;
POSIX rename(2) semantics, common practice for crash-safe files).
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from pathlib import Path

import httpx
import pytest

from tristock.cli import demo_catalog_dir
from tristock.stock.catalog import load_catalog

START_TIMEOUT_S = 60.0


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


@contextmanager
def server(
    catalog: Path, log: Path, *args: str, token: str | None = None
) -> Iterator[tuple[subprocess.Popen[bytes], str]]:
    """``tristock serve`` on loopback; yields (process, base URL) once /health answers."""
    port = free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("TRISTOCK_")}
    if token is not None:
        env["TRISTOCK_TOKEN"] = token
    cmd = [sys.executable, "-m", "tristock.cli", "serve", "--port", str(port)]
    with log.open("wb") as out:
        proc = subprocess.Popen(
            [*cmd, "--catalog", str(catalog), *args], stdout=out, stderr=subprocess.STDOUT, env=env
        )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + START_TIMEOUT_S
        while True:
            if proc.poll() is not None:
                pytest.fail(f"server exited ({proc.returncode}):\n{log.read_text()}")
            try:
                if httpx.get(f"{base}/health", timeout=2).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.monotonic() > deadline:
                pytest.fail(f"server did not answer in {START_TIMEOUT_S} s:\n{log.read_text()}")
            time.sleep(0.1)
        yield proc, base
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGINT)
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


@pytest.fixture()
def catalog_copy(tmp_path: Path) -> Path:
    target = tmp_path / "catalog"
    shutil.copytree(demo_catalog_dir(), target)
    return target


def test_concurrent_stock_deltas_end_in_the_exact_total(catalog_copy: Path, tmp_path: Path) -> None:
    part = max(load_catalog(catalog_copy).resistors, key=lambda r: r.stock)
    deltas = [-1 if n % 3 else 2 for n in range(200)]  # 200 writes, takes and returns mixed
    assert part.stock + min(0, sum(deltas)) >= 0 and part.stock >= deltas.count(-1)
    url_path = f"/v1/catalog/resistors/{part.id}"
    token = "server-test-token"
    log = tmp_path / "server.log"
    # Two worker processes: the in-process lock and the file lock are both on the path.
    with server(catalog_copy, log, "--workers", "2", token=token) as (_, base):
        headers = {"Authorization": f"Bearer {token}"}
        with httpx.Client(base_url=base, headers=headers, timeout=60) as http:

            def send(delta: int) -> int:
                return http.patch(url_path, json={"stock_delta": delta}).status_code

            with ThreadPoolExecutor(max_workers=24) as pool:
                codes = list(pool.map(send, deltas))
            final = http.get(url_path).json()["stock"]
    assert codes == [200] * len(deltas)
    expected = part.stock + sum(deltas)
    assert final == expected
    assert load_catalog(catalog_copy).get(part.id).stock == expected


def test_sigkill_during_writes_leaves_a_valid_catalog(catalog_copy: Path, tmp_path: Path) -> None:
    before = load_catalog(catalog_copy)
    part = before.capacitors[0]
    url_path = f"/v1/catalog/capacitors/{part.id}"
    acked = 0
    sent = 0
    lock = threading.Lock()
    stop = threading.Event()
    with server(catalog_copy, tmp_path / "server.log", "--allow-open-writes") as (proc, base):

        def writer() -> None:
            nonlocal acked, sent
            with httpx.Client(base_url=base, timeout=10) as http:
                while not stop.is_set():
                    with lock:
                        sent += 1
                    try:
                        r = http.patch(url_path, json={"stock_delta": 1})
                    except httpx.TransportError:
                        return
                    if r.status_code == 200:
                        with lock:
                            acked += 1

        threads = [threading.Thread(target=writer) for _ in range(6)]
        for t in threads:
            t.start()
        deadline = time.monotonic() + 30
        while acked < 40 and time.monotonic() < deadline:
            time.sleep(0.005)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        stop.set()
        for t in threads:
            t.join(timeout=20)
    assert acked >= 40
    after = load_catalog(catalog_copy)  # raises if any table were torn
    stock = after.get(part.id).stock
    # Every acknowledged write is on disk (fsync before the answer); at most the writes sent.
    assert part.stock + acked <= stock <= part.stock + sent
    changed = [p.id for p in after if p != before.get(p.id)]
    assert changed == [part.id]


def test_an_idempotency_key_survives_a_kill_9_restart(catalog_copy: Path, tmp_path: Path) -> None:
    """A PATCH with an Idempotency-Key, the server killed with SIGKILL, a new server on the same
    catalog: the repeat returns the first answer and the delta is applied once (the key is on
    disk beside the catalog, fsynced before the table's rename)."""
    part = load_catalog(catalog_copy).capacitors[0]
    url_path = f"/v1/catalog/capacitors/{part.id}"
    key = {"Idempotency-Key": "restock-2024-000017"}
    with server(catalog_copy, tmp_path / "first.log", "--allow-open-writes") as (proc, base):
        first = httpx.patch(base + url_path, json={"stock_delta": 3}, headers=key, timeout=30)
        assert first.status_code == 200, first.text
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    with server(catalog_copy, tmp_path / "second.log", "--allow-open-writes") as (_, base):
        again = httpx.patch(base + url_path, json={"stock_delta": 3}, headers=key, timeout=30)
        other = httpx.patch(base + url_path, json={"stock_delta": 4}, headers=key, timeout=30)
        now = httpx.get(base + url_path, timeout=30)
    assert again.status_code == 200 and again.headers["Idempotent-Replayed"] == "true"
    assert (again.json(), again.headers["ETag"]) == (first.json(), first.headers["ETag"])
    assert other.status_code == 422
    assert first.json()["stock"] == now.json()["stock"] == part.stock + 3
    assert load_catalog(catalog_copy).get(part.id).stock == part.stock + 3
