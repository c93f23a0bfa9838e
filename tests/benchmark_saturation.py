"""Responsiveness under saturation (a script, not a test): ``/health`` and catalog-read
latency while N clients keep cold design requests in flight against a real server.

    python tests/benchmark_saturation.py [--clients 400] [--workers 2] [--seconds 30]

Each client sends the bundled demo spec (target moved a few ppm per request, so no answer
comes from the cache) and sends the next as soon as it has an answer, 503s included (no
back-off: the worst case). Meanwhile ``/health`` and a 50-item catalog page are fetched on
new connections every 0.2 s; the figures count only the probes taken while every compute slot
was busy. Prints the answer codes and p50/p95/max of both latencies.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from pathlib import Path

from api_harness import percentile, saturate, server
from tristock.cli import demo_catalog_dir


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--clients", type=int, default=400)
    p.add_argument("--workers", type=int, default=2)
    p.add_argument("--seconds", type=float, default=30.0)
    args = p.parse_args()
    if not (1 <= args.clients <= 1000 and 1 <= args.workers <= 8 and 5 <= args.seconds <= 600):
        sys.exit("clients 1..1000, workers 1..8, seconds 5..600")
    with tempfile.TemporaryDirectory() as tmp:
        catalog = Path(tmp) / "catalog"
        shutil.copytree(demo_catalog_dir(), catalog)
        log = Path(tmp) / "server.log"
        with server(catalog, log, "--workers", str(args.workers)) as (_, base):
            print(f"server: {args.workers} worker(s), default settings, {os.cpu_count()} CPUs")
            found = saturate(base, args.clients, args.seconds, ramp_s=5.0)
    busy = [
        (h, c)
        for h, c, seen in zip(found.health_ms, found.catalog_ms, found.compute_seen, strict=True)
        if seen["running"] == seen["slots"]
    ]
    print(f"{args.clients} clients for {args.seconds:g} s: answers {found.heavy_codes}")
    print(f"probes: {len(found.health_ms)}, of which {len(busy)} with every compute slot busy")
    for name, values in (("/health", [h for h, _ in busy]), ("catalog page", [c for _, c in busy])):
        if values:
            print(
                f"  {name:13s} p50 {percentile(values, 50):5.0f} ms   "
                f"p95 {percentile(values, 95):5.0f} ms   max {max(values):5.0f} ms"
            )
    if hasattr(os, "getloadavg"):
        print("load average (1, 5, 15 min): {:.1f} {:.1f} {:.1f}".format(*os.getloadavg()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
