"""Property-based tests of the HTTP API from its own OpenAPI schema (schemathesis 4).

At least 1,000 generated requests, valid and invalid, over every operation (the budget per
operation is in ``tests/fuzz_api.py``, derandomized so every run sends the same cases): no
answer is a 5xx, every answer matches the schema (documented status, content type, body,
required headers) and invalid data is refused. ``python tests/fuzz_api.py`` runs ten times as
many outside CI.
"""

from __future__ import annotations

import warnings
from pathlib import Path

from fuzz_api import BUDGET, fuzz_app, run

MIN_CASES = 1000


def test_schema_fuzz_finds_no_server_error_and_no_schema_breach(tmp_path: Path) -> None:
    assert sum(p + n for p, n in BUDGET.values()) >= MIN_CASES
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
        schema = fuzz_app(tmp_path / "catalog")
        report = run(schema)
    assert report.failures == []
    assert not [s for s in report.statuses if s >= 500], report.statuses
    operations = {key.split(" [")[0] for key in report.cases}
    assert operations == set(BUDGET)  # every operation of the API was fuzzed
    assert report.total >= MIN_CASES, report.cases
