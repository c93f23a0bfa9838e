"""Figures for stock writes (not a test): latency of ``update_stock`` on a copy of the demo
catalog, and the editor race repeated.

    python tests/benchmark_stock_writes.py [--writes 200] [--races 10]

Latency: sequential writes by one process (the table last written by us: no quiet wait, the
catalog validated once per table content), and the first write after another program changed
a table (full validation; its quiet wait excluded by ageing the file).

Race: an editor truncates resistors.csv, writes half (cut mid-row or at a row end), pauses
0.2 s, writes the rest; 4 threads add 1 to one part meanwhile (quiet period 1.5 s). Each run
checks the exact invariant of tests/stock/test_stock_race.py: the editor's content with every
acknowledged delta applied, acknowledged answers in sequence.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from tristock import cli
from tristock.stock.catalog import StockError, WritePolicy, adjust_stock, load_catalog

RACE_POLICY = WritePolicy(quiet_s=1.5, max_wait_s=5.0)
EDITOR = (
    "import os,sys,time\n"
    "t,c,cut,ready=sys.argv[1:]\n"
    "d=open(c,'rb').read()\n"
    "f=open(t,'wb'); f.write(d[:int(cut)]); f.flush(); os.fsync(f.fileno())\n"
    "open(ready,'w').close(); time.sleep(0.2)\n"
    "f.write(d[int(cut):]); f.flush(); os.fsync(f.fileno()); f.close()\n"
)


def _copy(root: Path, name: str) -> Path:
    target = root / name
    shutil.copytree(cli.demo_catalog_dir(), target)
    return target


def _ms(values: list[float]) -> str:
    ordered = sorted(values)
    p90 = ordered[int(0.9 * (len(ordered) - 1))]
    return f"median {1e3 * statistics.median(ordered):.1f} ms, p90 {1e3 * p90:.1f} ms"


def latency(root: Path, writes: int) -> None:
    catalog = _copy(root, "latency")
    part = load_catalog(catalog).capacitors[0].id
    own: list[float] = []
    for _ in range(writes):
        t = time.perf_counter()
        adjust_stock(catalog, part, 1)
        own.append(time.perf_counter() - t)
    foreign: list[float] = []
    table = catalog / "capacitors.csv"
    for n in range(max(5, writes // 20)):
        table.write_bytes(table.read_bytes() + f"# edited elsewhere {n}\n".encode())
        old = time.time() - 60
        os.utime(table, (old, old))
        t = time.perf_counter()
        adjust_stock(catalog, part, 1)
        foreign.append(time.perf_counter() - t)
    print(f"write after our own write ({writes}): {_ms(own)}")
    print(f"first write after another program's edit ({len(foreign)}): {_ms(foreign)}")


def race(root: Path, run: int, cut_mid_row: bool) -> tuple[bool, int, int]:
    """One race; (invariant held, acknowledged writes, refused writes)."""
    catalog = _copy(root, f"race{run}")
    table = catalog / "resistors.csv"
    target = load_catalog(catalog).resistors[10]
    edited = table.read_bytes() + b"TR-EDITOR1,9.1k,1,100,E24,0.1,0603,0.004,77\n"
    start = edited.rindex(b"\n", 0, len(edited) // 2) + 1
    end = edited.index(b"\n", start)
    cut = (start + end) // 2 if cut_mid_row else end + 1
    content, ready = root / f"edited{run}.csv", root / f"ready{run}"
    content.write_bytes(edited)
    acked: list[int] = []
    refused = 0
    lock = threading.Lock()
    editor = subprocess.Popen(
        [sys.executable, "-c", EDITOR, str(table), str(content), str(cut), str(ready)]
    )
    while not ready.exists():
        time.sleep(0.002)

    def client() -> None:
        nonlocal refused
        for _ in range(8):
            try:
                new = adjust_stock(catalog, target.id, 1, policy=RACE_POLICY)
            except (StockError, ValueError):
                with lock:
                    refused += 1
                continue
            with lock:
                acked.append(new)

    threads = [threading.Thread(target=client) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    editor.wait()
    lines = edited.split(b"\n")
    for i, line in enumerate(lines):
        if line.startswith(target.id.encode() + b","):
            lines[i] = line.rsplit(b",", 1)[0] + b"," + str(target.stock + len(acked)).encode()
    expected = b"\n".join(lines)
    ok = table.read_bytes() == expected and sorted(acked) == list(
        range(target.stock + 1, target.stock + 1 + len(acked))
    )
    return ok, len(acked), refused


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--writes", type=int, default=200)
    parser.add_argument("--races", type=int, default=10)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        latency(root, args.writes)
        outcomes = [race(root, n, cut_mid_row=n % 2 == 0) for n in range(args.races)]
    held = sum(ok for ok, _, _ in outcomes)
    print(
        f"editor race: invariant held in {held} of {len(outcomes)} runs; "
        f"{sum(a for _, a, _ in outcomes)} writes acknowledged, "
        f"{sum(r for _, _, r in outcomes)} refused"
    )
    return 0 if held == len(outcomes) else 1


if __name__ == "__main__":
    sys.exit(main())
