"""Load figures for the HTTP API (a script, not a test): sustained ``POST /v1/design`` rate
and latency for the bundled demo spec with N concurrent clients against a real server.

    python tests/benchmark_api.py [--clients 2] [--workers 2] [--seconds 20] [--max-requests 400]
                                  [--set TRISTOCK_COMPUTE_NICE=0 ...]

Two runs: one spec repeated (served from the per-worker answer cache after the first search)
and distinct specs (every request a cold search; the target moves by a few ppm, so the same
boards come back and their worst cases are remembered by each worker, ``worst_cases``).

Starts ``tristock serve`` on a free 127.0.0.1 port with a private copy of the demo catalog,
warms it up, then runs the clients for ``--seconds`` (or until ``--max-requests``), and prints
requests/s, p50/p99 latency and the answer codes. Then it times one design in-process and
splits it into the search and the full-model re-check of each candidate, to show where a
request's time goes.
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
import tomllib
from collections import Counter
from pathlib import Path
from typing import Any

import httpx

from tristock.cli import demo_catalog_dir, example_spec_path


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        port: int = s.getsockname()[1]
        return port


def start(
    catalog: Path, workers: int, log: Path, settings: dict[str, str]
) -> tuple[subprocess.Popen[bytes], str]:
    port = free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("TRISTOCK_")} | settings
    cmd = [sys.executable, "-m", "tristock.cli", "serve", "--port", str(port)]
    cmd += ["--catalog", str(catalog), "--workers", str(workers)]
    with log.open("wb") as out:
        proc = subprocess.Popen(cmd, stdout=out, stderr=subprocess.STDOUT, env=env)
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 90
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            sys.exit(f"server exited:\n{log.read_text()}")
        try:
            if httpx.get(f"{base}/health", timeout=2).status_code == 200:
                return proc, base
        except httpx.TransportError:
            time.sleep(0.1)
    proc.kill()
    sys.exit("server did not start in 90 s")


def percentile(values: list[float], q: float) -> float:
    """Nearest-rank percentile (common practice), q in [0, 100]."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(q / 100 * len(ordered) + 0.5)))
    return ordered[rank - 1]


def load(
    base: str, body: dict[str, Any], clients: int, seconds: float, cap: int, distinct: bool
) -> None:
    """Run the clients. ``distinct``: every request moves the target frequency by a few ppm,
    so none is answered from the server's answer cache (cold searches)."""
    latencies: list[float] = []
    codes: Counter[int | str] = Counter()
    lock = threading.Lock()
    stop_at = time.monotonic() + seconds

    def client() -> None:
        with httpx.Client(base_url=base, timeout=120) as http:
            while time.monotonic() < stop_at:
                with lock:
                    if sum(codes.values()) >= cap:
                        return
                    n = sum(codes.values()) + 1
                sent = body
                if distinct:
                    spec = dict(body["spec"])
                    freq = dict(spec["frequency"])
                    freq["target_hz"] = freq["target_hz"] * (1 + 3e-6 * n)
                    sent = {**body, "spec": {**spec, "frequency": freq}}
                t0 = time.perf_counter()
                try:
                    code: int | str = http.post("/v1/design", json=sent).status_code
                except httpx.TransportError as err:
                    code = type(err).__name__
                dt = time.perf_counter() - t0
                with lock:
                    codes[code] += 1
                    if code == 200:
                        latencies.append(dt)

    threads = [threading.Thread(target=client) for _ in range(clients)]
    t0 = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    wall = time.perf_counter() - t0
    ok = len(latencies)
    kind = "distinct specs (cold)" if distinct else "one repeated spec (answer cache)"
    print(
        f"{kind}, {clients} clients, {wall:.1f} s: {ok} designs answered 200, codes {dict(codes)}"
    )
    if ok:
        print(f"  sustained    {ok / wall:.2f} requests/s")
        print(
            f"  latency      p50 {percentile(latencies, 50) * 1000:.0f} ms, "
            f"p99 {percentile(latencies, 99) * 1000:.0f} ms, "
            f"mean {statistics.fmean(latencies) * 1000:.0f} ms"
        )


def where_the_time_goes(spec_data: dict[str, Any]) -> None:
    """One design in-process: total, and the part spent re-checking candidates (each with
    no worst case remembered from the runs before)."""
    from tristock.analysis.bundle import analyse
    from tristock.analysis.memo import forget as forget_remembered
    from tristock.circuits.board import resolve
    from tristock.designs import design
    from tristock.spec.loading import parse_spec
    from tristock.stock.catalog import load_catalog

    catalog = load_catalog(demo_catalog_dir())
    spec = parse_spec(spec_data)
    design(spec, catalog)  # warm caches
    totals, rechecks = [], []
    for _ in range(3):  # best of three: the machine may be busy with other work
        forget_remembered()  # each part measured cold
        t0 = time.perf_counter()
        result = design(spec, catalog)
        totals.append(time.perf_counter() - t0)
        forget_remembered()
        t0 = time.perf_counter()
        for c in result.candidates:
            d = resolve({k: v.id for k, v in c.parts.items()}, catalog)
            analyse(d, spec, samples=4000)
        rechecks.append(time.perf_counter() - t0)
    total, recheck = min(totals), min(rechecks)
    n = len(result.candidates)
    print(
        f"in-process, one design (top {spec.ranking.top}): {total * 1000:.0f} ms; "
        f"re-checking its {n} candidates with the full model (worst case, Monte Carlo 4000, "
        f"sensitivities, drift) alone takes {recheck * 1000:.0f} ms "
        f"({100 * recheck / total:.0f} %), the search the rest"
    )


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--clients", type=int, default=2)
    p.add_argument("--workers", type=int, default=2)
    p.add_argument("--seconds", type=float, default=20.0)
    p.add_argument("--max-requests", type=int, default=400)
    p.add_argument("--top", type=int, help="override the spec's ranking.top")
    p.add_argument(
        "--set",
        action="append",
        default=[],
        metavar="TRISTOCK_NAME=VALUE",
        help="a service setting for the server (repeatable); default: all defaults",
    )
    args = p.parse_args()
    settings = dict(item.split("=", 1) for item in args.set)
    if not all(k.startswith("TRISTOCK_") for k in settings):
        sys.exit("--set: TRISTOCK_NAME=VALUE")
    if not (1 <= args.clients <= 64 and 1 <= args.workers <= 8 and 0 < args.seconds <= 120):
        sys.exit("clients 1..64, workers 1..8, seconds 0..120")
    spec_data = tomllib.loads(example_spec_path().read_text(encoding="utf-8"))
    body: dict[str, Any] = {"spec": spec_data}
    if args.top:
        body["top"] = args.top
    with tempfile.TemporaryDirectory() as tmp:
        catalog = Path(tmp) / "catalog"
        shutil.copytree(demo_catalog_dir(), catalog)
        proc, base = start(catalog, args.workers, Path(tmp) / "server.log", settings)
        try:
            print(f"server: {args.workers} worker(s) on {base}, {os.cpu_count()} CPUs, {settings}")
            for _ in range(args.workers * 2):  # warm every worker
                httpx.post(f"{base}/v1/design", json=body, timeout=120)
            load(base, body, args.clients, args.seconds, args.max_requests, distinct=False)
            load(base, body, args.clients, args.seconds, args.max_requests, distinct=True)
        finally:
            proc.send_signal(signal.SIGINT)
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                proc.kill()
    where_the_time_goes(spec_data | ({"ranking": {"top": args.top}} if args.top else {}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
