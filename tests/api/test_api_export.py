"""``POST /v1/export/bom`` and ``/v1/export/spice`` give the CLI's text for the same DESIGN
body, and the design answer carries each candidate's DESIGN file (FastAPI's TestClient)."""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os
import tomllib
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from tristock.api.app import create_app
from tristock.api.settings import Settings

from tristock.cli import main
from tristock.examples import demo_catalog_dir, example_spec_path

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

DEMO = demo_catalog_dir()


def tristock(*argv: str | Path) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        assert main([str(a) for a in argv]) == 0
    return out.getvalue()


@pytest.fixture(scope="module")
def api() -> Iterator[TestClient]:
    with pytest.MonkeyPatch.context() as mp:
        for name in [k for k in os.environ if k.upper().startswith("TRISTOCK_")]:
            mp.delenv(name)
        app = create_app(Settings(catalog_dir=DEMO))
        with TestClient(app, raise_server_exceptions=False) as c:
            yield c


@pytest.fixture(scope="module")
def saved(api: TestClient) -> dict[str, Any]:
    """Rank 1's DESIGN file as the design answer carries it."""
    spec = tomllib.loads(example_spec_path("demo").read_text(encoding="utf-8"))
    r = api.post("/v1/design", json={"spec": spec, "top": 2})
    assert r.status_code == 200, r.text
    candidates = r.json()["candidates"]
    for c in candidates:
        assert c["design_file"]["parts"] == {k: v["id"] for k, v in c["parts"].items()}
    design_file: dict[str, Any] = candidates[0]["design_file"]
    return design_file


def test_bom_is_the_clis_csv(api: TestClient, saved: dict[str, Any], tmp_path: Path) -> None:
    r = api.post("/v1/export/bom", json={**saved, "boards": 40})
    assert r.status_code == 200, r.text
    assert r.headers["content-type"].startswith("text/csv")
    path = tmp_path / "d.json"
    path.write_text(json.dumps(saved), encoding="utf-8")
    cli = tristock("export", "bom", path, "--catalog", DEMO, "--boards", "40")
    assert r.content.decode("utf-8") == cli.rstrip("\n") + "\n"
    rows = list(csv.DictReader(io.StringIO(r.content.decode("utf-8"), newline="")))
    assert rows[-1]["stock_code"] == "TOTAL" and rows[-1]["pieces_for_build"] == "200"


def test_spice_is_the_clis_netlist(api: TestClient, saved: dict[str, Any], tmp_path: Path) -> None:
    r = api.post("/v1/export/spice", json=saved)
    assert r.status_code == 200, r.text
    assert r.headers["content-type"].startswith("text/plain")
    path = tmp_path / "d.json"
    path.write_text(json.dumps(saved), encoding="utf-8")
    cli = tristock("export", "spice", path, "--catalog", DEMO)
    body = r.content.decode("utf-8").splitlines()
    assert body[1:] == cli.splitlines()[1:]  # the first line names the CLI's file
    assert body[-1] == ".end"
    r = api.post("/v1/export/spice", json={**saved, "corner": "amax"})
    assert r.status_code == 200 and "worst-case corner amax" in r.text
    assert api.post("/v1/export/spice", json={**saved, "corner": "hot"}).status_code == 422


def test_bad_part_and_a_tuned_corner_are_422s_naming_the_field(
    api: TestClient, saved: dict[str, Any]
) -> None:
    """A tuned design exports at the body's ``wiper`` and ``range`` (the CLI's --dial and
    --range); a worst-case corner is refused for it, naming the field."""
    bad = {**saved, "parts": {**saved["parts"], "R2": "NOPE"}}
    r = api.post("/v1/export/bom", json=bad)
    assert r.status_code == 422 and "R2" in r.text
    spec = tomllib.loads(example_spec_path("tuned").read_text(encoding="utf-8"))
    parts = {**saved["parts"], "RV1": "VP-100K", "R4": "R5J-1K00"}
    tuned = {"spec": spec, "parts": parts, "wiper": 0.4}
    r = api.post("/v1/export/spice", json=tuned)
    assert r.status_code == 200 and "range 1 of 1" in r.text and "wiper 0.4" in r.text
    r = api.post("/v1/export/spice", json={**tuned, "corner": "fmin"})
    assert r.status_code == 422 and "corner" in r.text
    r = api.post("/v1/export/bom", json={**saved, "boards": 0})
    assert r.status_code == 422 and "boards" in r.text
