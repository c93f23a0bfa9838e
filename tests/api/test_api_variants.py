"""``POST /v1/design``: distinct designs by default, each with its ``variants``;
``all_variants: true`` ranks every variant on its own (the CLI's ``--all-variants``)."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient
from test_api import DEMO, client, demo_spec

from tristock.circuits.board import resolve
from tristock.designs.variants import variant_key
from tristock.stock.catalog import load_catalog


@pytest.fixture(scope="module")
def api() -> Iterator[TestClient]:
    with client(DEMO) as c:
        yield c


def test_distinct_by_default_and_every_variant_on_request(api: TestClient) -> None:
    body = {"spec": demo_spec(), "top": 6, "time_limit_s": 120}
    distinct = api.post("/v1/design", json=body)
    every = api.post("/v1/design", json={**body, "all_variants": True})
    assert distinct.status_code == every.status_code == 200, distinct.text + every.text
    a, b = distinct.json(), every.json()
    assert a["search"]["distinct"] is True and b["search"]["distinct"] is False
    catalog = load_catalog(DEMO)
    keys = [variant_key(resolve(c["design_file"]["parts"], catalog)) for c in a["candidates"]]
    assert len(set(keys)) == len(keys) == 6
    assert any(c["variants"] for c in a["candidates"])  # the demo's rank 1 has a quad twin
    plain = [c["design_file"]["parts"] for c in b["candidates"]]
    assert len({variant_key(resolve(p, catalog)) for p in plain}) < 6
    assert all(c["variants"] == [] for c in b["candidates"])


def test_all_variants_must_be_a_boolean(api: TestClient) -> None:
    r = api.post("/v1/design", json={"spec": demo_spec(), "all_variants": "yes"})
    assert r.status_code == 422
    assert any(e["loc"][-1] == "all_variants" for e in r.json()["errors"])
