"""Benchmark of the comparator-IC search (a script, not a test:
``python tests/benchmark_comparator.py``).

Prints one line per (spec, engine): the search's own elapsed time, the rows it scored with
the full model (``search.evaluated``), whether the answer is proven optimal, and rank 1's
stage. Two specs on the demo stock room:

- ``example``: the bundled ``--example comparator`` (5 V, 100 kHz, 2 Vpp; a push-pull U2
  wins, the open-drain stages are searched too);
- ``open-drain``: a single 12 V rail, 20 kHz, 4 Vpp ±8 % (``OPEN_DRAIN_SPEC``): the demo's
  push-pull comparators are rated to 5.5 V, so only the open-drain U2 with a pull-up R5 can
  serve, under the stiffness rule R5·(1/R3 + 1/R2) ≤ 0.1.

Wall-clock figures depend on the machine (and on what else runs on it).
"""

from __future__ import annotations

import sys
import tomllib
from pathlib import Path
from typing import Any

from tristock.designs import design
from tristock.spec.loading import parse_spec
from tristock.stock.catalog import load_catalog

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "catalogs" / "demo"
EXAMPLE = REPO / "src" / "tristock" / "examples" / "comparator.toml"
LIMIT_S = 600.0

OPEN_DRAIN_SPEC: dict[str, Any] = {
    "circuit": {"schmitt": "comparator"},
    "supply": {"positive_v": 12.0, "negative_v": 0.0, "tolerance_pct": 5.0},
    "frequency": {"target_hz": 20000.0, "tolerance_pct": 3.0},
    "triangle": {"amplitude_vpp": 4.0, "tolerance_pct": 8.0},
    "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
    "build": {"boards": 40},
    "limits": {"resistor_series": ["E24", "E96"], "dielectrics": ["C0G"]},
    "ranking": {"by": "balanced", "top": 5},
}


def main() -> int:
    catalog = load_catalog(DEMO)
    specs = {
        "example": parse_spec(tomllib.loads(EXAMPLE.read_text(encoding="utf-8"))),
        "open-drain": parse_spec(OPEN_DRAIN_SPEC),
    }
    print(f"{'spec':<11} {'engine':<9} {'elapsed s':>9} {'rows scored':>12} proven  rank 1")
    for name, spec in specs.items():
        for engine in ("enumerate", "cpsat"):
            result = design(spec, catalog, engine=engine, time_limit_s=LIMIT_S)
            s = result.search
            first = result.candidates[0] if result.candidates else None
            stage = (
                "+".join(first.parts[d].id for d in ("U1", "U2", "R5") if d in first.parts)
                if first
                else "-"
            )
            print(
                f"{name:<11} {engine:<9} {s.elapsed_s:>9.1f} {s.evaluated:>12,} "
                f"{s.proven_optimal!s:<7} {stage}"
            )
            sys.stdout.flush()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
