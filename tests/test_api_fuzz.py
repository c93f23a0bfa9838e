"""Property-based tests of the HTTP API from its own OpenAPI schema (schemathesis 4).

Every operation gets generated requests, valid and invalid; the answers must never be a 5xx,
and must match the schema (status code documented, content type, body shape). Bounded: 25
examples per operation; the server's search time limit is cut to 0.5 s and the searches run
on a private copy of the small test catalog, so writes change only that copy.
"""

from __future__ import annotations

import shutil
import warnings
from pathlib import Path

import pytest
import schemathesis
from api.app import create_app
from api.settings import Settings
from hypothesis import HealthCheck, settings
from schemathesis.checks import (
    content_type_conformance,
    not_a_server_error,
    response_schema_conformance,
    status_code_conformance,
)

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

SMALL = Path(__file__).parent / "fixtures" / "small_catalog"
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
]


@pytest.fixture()
def api_schema(tmp_path: Path) -> schemathesis.BaseSchema:
    catalog = tmp_path / "catalog"
    shutil.copytree(SMALL, catalog)
    app = create_app(
        Settings(
            catalog_dir=catalog,
            allow_open_writes=True,
            max_time_limit_s=0.5,
            default_time_limit_s=0.5,
            max_samples=100_000,
        )
    )
    with TestClient(app):  # runs the app's start-up once, like a server would
        pass
    return schemathesis.openapi.from_asgi("/openapi.json", app)


schema = schemathesis.pytest.from_fixture("api_schema")


@schema.parametrize()
@settings(
    max_examples=25,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
def test_no_server_errors_and_answers_match_the_schema(case: schemathesis.Case) -> None:
    case.call_and_validate(checks=CHECKS)
