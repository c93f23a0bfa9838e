"""Schema fuzz of the HTTP API (schemathesis 4, hypothesis): requests generated from the app's
own OpenAPI document, valid ones (positive) and invalid ones (negative), per operation.

Every answer must not be a 5xx, must have a documented status, content type, body shape and
required headers, and invalid data must be refused with a 4xx. The run is derandomized (the
same cases every time) and bounded per operation (``BUDGET``, scaled by ``--scale``).

    python tests/fuzz_api.py [--scale 10]     # about 10,000 cases; prints the counts

``tests/api/test_api_fuzz.py`` runs it in CI at scale 1 (at least 1,000 cases).
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
import warnings
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import schemathesis
from hypothesis import HealthCheck, Phase, given, settings
from schemathesis import GenerationMode
from schemathesis.checks import (
    content_type_conformance,
    negative_data_rejection,
    not_a_server_error,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

SMALL = Path(__file__).parent / "fixtures" / "small_catalog"
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
    response_headers_conformance,
    negative_data_rejection,
]

#: Cases per operation at scale 1: (positive, negative). The compute endpoints cost the most
#: (a search or an analysis per valid request); the catalog endpoints are cheap.
BUDGET: dict[str, tuple[int, int]] = {
    "POST /v1/design": (70, 45),
    "POST /v1/reoptimise": (60, 45),
    "POST /v1/analyse": (60, 45),
    "POST /v1/simulate": (60, 45),
    "POST /v1/export/bom": (40, 30),
    "POST /v1/export/spice": (30, 30),
    "GET /v1/catalog/{kind}": (160, 90),
    "GET /v1/catalog/{kind}/{part_id}": (100, 60),
    "PATCH /v1/catalog/{kind}/{part_id}": (110, 70),
    "POST /v1/designs": (30, 20),
    "GET /v1/designs": (10, 0),  # a boolean query only: nothing invalid to generate
    "GET /v1/designs/{name}": (15, 0),  # any text is a name: nothing invalid to generate
    "GET /v1/designs/{name}/revisions/{revision}": (15, 10),
    "POST /v1/designs/{name}/accept": (20, 15),
    "POST /v1/impact": (20, 15),
    "GET /health": (5, 0),
    "GET /problems/{name}": (20, 30),
}


@dataclass
class FuzzReport:
    """Cases sent per operation and mode, answers by status, and the failures found."""

    cases: Counter[str] = field(default_factory=Counter)
    statuses: Counter[int] = field(default_factory=Counter)
    failures: list[str] = field(default_factory=list)
    seconds: float = 0.0

    @property
    def total(self) -> int:
        return sum(self.cases.values())


def fuzz_app(catalog: Path) -> schemathesis.BaseSchema:
    """The API on a private copy of the small test catalog (writes change only the copy), with
    search time cut to 0.5 s and analyses to 2,000 samples so that valid requests are quick."""
    from tristock.api.app import create_app
    from tristock.api.settings import Settings

    shutil.copytree(SMALL, catalog)
    app = create_app(
        Settings(
            catalog_dir=catalog,
            allow_open_writes=True,
            max_time_limit_s=0.5,
            default_time_limit_s=0.5,
            max_samples=2000,
            search_wait_s=600,
        )
    )
    return schemathesis.openapi.from_asgi("/openapi.json", app)


def run(
    schema: schemathesis.BaseSchema, scale: float = 1.0, stop_on_failure: bool = True
) -> FuzzReport:
    """Fuzz every operation of ``schema`` with its budget times ``scale``."""
    report = FuzzReport()
    started = time.perf_counter()
    for result in schema.get_all_operations():
        operation = result.ok()
        positive, negative = BUDGET[operation.label]
        for mode, budget in (
            (GenerationMode.POSITIVE, positive),
            (GenerationMode.NEGATIVE, negative),
        ):
            if budget:
                _fuzz_one(operation, mode, max(1, round(budget * scale)), report, stop_on_failure)
    report.seconds = time.perf_counter() - started
    return report


def _fuzz_one(
    operation: schemathesis.APIOperation,
    mode: GenerationMode,
    examples: int,
    report: FuzzReport,
    stop_on_failure: bool,
) -> None:
    key = f"{operation.label} [{mode.value}]"

    @settings(
        max_examples=examples,
        derandomize=True,
        database=None,
        deadline=None,
        phases=[Phase.explicit, Phase.generate],
        suppress_health_check=list(HealthCheck),
    )
    @given(case=operation.as_strategy(generation_mode=mode))
    def send(case: schemathesis.Case) -> None:
        report.cases[key] += 1
        response = case.call()
        report.statuses[response.status_code] += 1
        try:
            case.validate_response(response, checks=CHECKS)
        except Exception as err:
            report.failures.append(f"{key}: {err}")
            if stop_on_failure:
                raise

    send()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scale", type=float, default=10.0, help="times the CI budget")
    args = parser.parse_args()
    if not 0 < args.scale <= 100:
        sys.exit("--scale: 0 < scale <= 100")
    warnings.simplefilter("ignore")
    with tempfile.TemporaryDirectory() as tmp:
        report = run(fuzz_app(Path(tmp) / "catalog"), args.scale, stop_on_failure=False)
    print(f"{report.total} cases in {report.seconds:.0f} s, scale {args.scale:g}")
    for key, n in sorted(report.cases.items()):
        print(f"  {n:6d}  {key}")
    print("answers by status:", dict(sorted(report.statuses.items())))
    server_errors = sum(n for status, n in report.statuses.items() if status >= 500)
    print(f"5xx answers: {server_errors}; failed checks: {len(report.failures)}")
    for failure in report.failures[:20]:
        print("  " + failure.splitlines()[0])
    return 1 if report.failures or server_errors else 0


if __name__ == "__main__":
    sys.exit(main())
