"""The registry's HTTP routes in process (TestClient), on SQLite and PostgreSQL: release with
the token, reads, 404s, a refused release (422 with reasons), the catalog PATCH naming the
designs a stock change affects, impact with a what-if body, accept, and 503 when the database
cannot be reached. Problem bodies are RFC 9457 (``application/problem+json``)."""

from __future__ import annotations

import json
import shutil
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from test_registry_cli import DEMO_DESIGN
from tristock.api.app import create_app
from tristock.api.settings import Settings

from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.loading import load_spec

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

TOKEN = "registry-test-token"
AUTH = {"Authorization": f"Bearer {TOKEN}"}


@pytest.fixture
def api(registry_url: str, tmp_path: Path) -> Iterator[TestClient]:
    shop = tmp_path / "shop"
    shutil.copytree(demo_catalog_dir(), shop)
    app = create_app(Settings(catalog_dir=shop, token=TOKEN, db=registry_url, max_searches=1))
    with TestClient(app, raise_server_exceptions=False) as client:
        yield client


def release_body(name: str, boards: int = 40, **parts: str) -> dict[str, Any]:
    spec = load_spec(example_spec_path("demo")).model_dump(mode="json")
    return {"name": name, "boards": boards,
            "design": {"spec": spec, "parts": {**DEMO_DESIGN, **parts}}}  # fmt: skip


def problem(r: Any, status: int) -> dict[str, Any]:
    assert r.status_code == status, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    body: dict[str, Any] = r.json()
    return body


def test_release_read_impact_accept(api: TestClient) -> None:
    problem(api.post("/v1/designs", json=release_body("bench-a")), 401)
    r = api.post("/v1/designs", json=release_body("bench-a"), headers=AUTH)
    assert r.status_code == 201, r.text
    assert (r.json()["name"], r.json()["revision"]) == ("bench-a", 1)
    assert api.post("/v1/designs", json=release_body("bench-b"), headers=AUTH).status_code == 201
    assert [d["name"] for d in api.get("/v1/designs").json()] == ["bench-a", "bench-b"]
    assert api.get("/v1/designs/bench-a").json()["design"]["parts"] == DEMO_DESIGN
    assert api.get("/v1/designs/bench-a/revisions/1").json()["boards"] == 40
    assert "bench-x" in problem(api.get("/v1/designs/bench-x"), 404)["detail"]
    problem(api.get("/v1/designs/bench-a/revisions/9"), 404)

    r = api.patch("/v1/catalog/capacitors/CPPG-2N20", json={"stock": 60}, headers=AUTH)
    assert r.status_code == 200, r.text
    assert r.headers["X-Affected-Designs"] == "bench-a, bench-b"  # 2 x 40 > 60
    r = api.patch("/v1/catalog/capacitors/CPPG-2N20", json={"stock": 1000}, headers=AUTH)
    assert r.headers["X-Affected-Designs"] == ""

    report = api.post("/v1/impact", json={}).json()
    assert report["over_subscribed"] == [] and report["proposal"] is None
    what_if = {"what_if": [{"id": "CPPG-2N20", "stock_delta": -950}]}
    r = api.post("/v1/impact", json=what_if)
    assert r.status_code == 200, r.text
    report = r.json()
    assert report["what_if"] == [{"id": "CPPG-2N20", "stock_before": 1000, "stock_after": 50}]
    assert report["proposal"]["proven"] and report["proposal"]["total_changes"] == 1
    [moved] = [d for d in report["proposal"]["designs"] if d["changed"]]
    r = api.post(f"/v1/designs/{moved['name']}/accept", json={"proposal": report})
    problem(r, 401)
    r = api.post(f"/v1/designs/{moved['name']}/accept", json={"proposal": report}, headers=AUTH)
    assert r.status_code == 200, r.text
    assert r.json()["revision"] == 2 and r.json()["source"] == "accept"
    r = api.post(f"/v1/designs/{moved['name']}/accept", json={"proposal": report}, headers=AUTH)
    assert "latest is 2" in problem(r, 409)["detail"]
    bad = {"what_if": [{"id": "NO-SUCH-PART", "stock": 5}]}
    errors = problem(api.post("/v1/impact", json=bad), 422)["errors"]
    assert "NO-SUCH-PART" in json.dumps(errors)


def test_a_release_failing_its_spec_is_refused_with_reasons(api: TestClient) -> None:
    r = api.post("/v1/designs", json=release_body("bad", R3="R1F-100K"), headers=AUTH)
    body = problem(r, 422)
    assert any("outside the spec" in e["msg"] for e in body["errors"])
    assert api.get("/v1/designs").json() == []


def test_an_unreachable_database_is_503(tmp_path: Path) -> None:
    gone = "postgresql+psycopg://x@/x?host=/nonexistent-socket-dir&port=1"
    app = create_app(Settings(catalog_dir=demo_catalog_dir(), token=TOKEN, db=gone))
    with TestClient(app, raise_server_exceptions=False) as client:
        assert "registry" in problem(client.get("/v1/designs"), 503)["detail"]
        problem(client.post("/v1/impact", json={}), 503)
