"""The editor race: another program saves resistors.csv by truncating it, writing half,
pausing and writing the rest, while clients PATCH the stock of a part through the app.

Invariant (exact): the final table is the editor's content with the target's stock field set
to its stock in that content plus the number of acknowledged deltas (each +1), every other
byte as the editor wrote it; the acknowledged answers are exactly those stocks in sequence.
So nothing the editor wrote is lost, every acknowledged delta is applied once, and no PATCH
succeeded against the half-written table (its change would have been overwritten by the
rest of the save, or written over it). Refusals (503 while the table is busy) write nothing.

The quiet period (1.5 s) is longer than the editor's pause (0.2 s), as the protection needs;
see ``tristock.stock.snapshot`` for what no writer can tell apart.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import textwrap
import threading
import time
import warnings
from pathlib import Path

import pytest
from tristock.api.app import create_app
from tristock.api.settings import Settings

from tristock import cli
from tristock.stock.catalog import WritePolicy, load_catalog

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

POLICY = WritePolicy(quiet_s=1.5, max_wait_s=5.0)
PAUSE_S = 0.2
CLIENTS = 4
REQUESTS_PER_CLIENT = 10
AFTER_SAVE_S = 2.5  # clients keep writing this long after the save ends

EDITOR = textwrap.dedent(
    """
    import os, sys, time
    table, content, cut, pause, ready, done = sys.argv[1:]
    data = open(content, "rb").read()
    with open(table, "wb") as f:  # truncates, same file
        f.write(data[: int(cut)])
        f.flush()
        os.fsync(f.fileno())
        open(ready, "w").close()
        time.sleep(float(pause))
        f.write(data[int(cut) :])
        f.flush()
        os.fsync(f.fileno())
    with open(done, "w") as f:
        f.write(repr(time.time()))
    """
)


def _edited(original: bytes, target: str, other: str) -> bytes:
    """What the editor saves: another row's cost changed and a new row appended."""
    lines = original.split(b"\n")
    out = []
    for line in lines:
        if line.startswith(other.encode() + b","):
            fields = line.split(b",")
            fields[-2] = b"0.125"
            line = b",".join(fields)
        out.append(line)
    assert any(ln.startswith(target.encode() + b",") for ln in out)
    text = b"\n".join(out)
    return text + b"TR-EDITOR1,9.1k,1,100,E24,0.1,0603,0.004,77\n"


def _with_stock(table: bytes, part_id: str, stock: int) -> bytes:
    """``table`` with the last field of ``part_id``'s row set to ``stock`` (demo rows end
    with the stock column)."""
    lines = table.split(b"\n")
    for i, line in enumerate(lines):
        if line.startswith(part_id.encode() + b","):
            lines[i] = line.rsplit(b",", 1)[0] + b"," + str(stock).encode()
    return b"\n".join(lines)


@pytest.mark.parametrize("cut_at", ["mid-line", "line-end"])
def test_patches_during_an_editor_save_lose_nothing(tmp_path: Path, cut_at: str) -> None:
    catalog = tmp_path / "catalog"
    shutil.copytree(cli.demo_catalog_dir(), catalog)
    table = catalog / "resistors.csv"
    original = table.read_bytes()
    resistors = load_catalog(catalog).resistors
    target, other = resistors[10], resistors[20]  # both in the first half of the table
    edited = _edited(original, target.id, other.id)
    line_start = edited.rindex(b"\n", 0, len(edited) // 2) + 1
    line_end = edited.index(b"\n", line_start)
    # Mid-line: a torn row, so the half does not validate; line-end: a valid, shorter table.
    cut = (line_start + line_end) // 2 if cut_at == "mid-line" else line_end + 1
    content = tmp_path / "edited.csv"
    content.write_bytes(edited)
    ready, done = tmp_path / "ready", tmp_path / "done"

    app = create_app(Settings(catalog_dir=catalog, allow_open_writes=True))
    app.state.store.write_policy = POLICY
    url = f"/v1/catalog/resistors/{target.id}"
    results: list[tuple[float, int, int | None]] = []  # (sent at, status, stock answered)
    lock = threading.Lock()
    with TestClient(app, raise_server_exceptions=False) as c:
        assert c.get(url).json()["stock"] == target.stock
        args = [str(table), str(content), str(cut), str(PAUSE_S), str(ready), str(done)]
        editor = subprocess.Popen([sys.executable, "-c", EDITOR, *args])
        deadline = time.monotonic() + 60
        while not ready.exists():
            assert editor.poll() is None and time.monotonic() < deadline, "editor did not start"
            time.sleep(0.005)

        def client_loop() -> None:
            for _ in range(REQUESTS_PER_CLIENT):
                if done.exists() and time.time() > float(done.read_text()) + AFTER_SAVE_S:
                    return
                sent = time.time()
                r = c.patch(url, json={"stock_delta": 1})
                stock = r.json().get("stock") if r.status_code == 200 else None
                with lock:
                    results.append((sent, r.status_code, stock))

        threads = [threading.Thread(target=client_loop) for _ in range(CLIENTS)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=120)
        assert editor.wait(timeout=60) == 0
    saved_at = float(done.read_text())

    statuses = {status for _, status, _ in results}
    assert statuses <= {200, 503}, results
    acked = sorted(stock for _, status, stock in results if status == 200 and stock is not None)
    assert acked, results
    assert acked == list(range(target.stock + 1, target.stock + 1 + len(acked)))
    assert table.read_bytes() == _with_stock(edited, target.id, target.stock + len(acked))
    # Some PATCHes were sent while the table was half-written: they waited, then landed.
    assert any(sent < saved_at and status == 200 for sent, status, _ in results), results
    after = load_catalog(catalog)
    assert after.get("TR-EDITOR1").stock == 77 and after.get(other.id).unit_cost == 0.125
