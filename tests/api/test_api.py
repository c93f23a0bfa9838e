"""HTTP API (api/) through FastAPI's in-process TestClient: every endpoint, error code and
field path, and the same JSON as the CLI's ``--json`` for the same input.

Expected values come from the library itself (the CLI, ``load_catalog``), never from numbers
typed in here; the HTTP status codes follow RFC 9110 (common practice for 401/403/409/413/422).
"""

from __future__ import annotations

import json
import os
import shutil
import tomllib
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from tristock.api.app import create_app
from tristock.api.settings import Settings

from tristock import cli
from tristock.stock.catalog import COLUMNS, KINDS, OPTIONAL_COLUMNS, load_catalog, set_stock

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

DEMO = cli.demo_catalog_dir()
SPEC_FILE = cli.example_spec_path()
BROKEN = Path(__file__).parents[1] / "fixtures" / "broken_catalog"


def demo_spec() -> dict[str, Any]:
    return tomllib.loads(SPEC_FILE.read_text(encoding="utf-8"))


def client(catalog: Path, **settings: Any) -> TestClient:
    app = create_app(Settings(catalog_dir=catalog, **settings))
    return TestClient(app, raise_server_exceptions=False)


@pytest.fixture(autouse=True, scope="module")
def no_service_environment() -> Iterator[None]:
    """Settings read TRISTOCK_* variables: none of the developer's may leak into these tests."""
    with pytest.MonkeyPatch.context() as mp:
        for name in [k for k in os.environ if k.upper().startswith("TRISTOCK_")]:
            mp.delenv(name)
        yield


@pytest.fixture()
def catalog_copy(tmp_path: Path) -> Path:
    """A private copy of the demo stock room for tests that write or edit it."""
    target = tmp_path / "catalog"
    shutil.copytree(DEMO, target)
    return target


@pytest.fixture(scope="module")
def ro_catalog(tmp_path_factory: pytest.TempPathFactory) -> Path:
    target = tmp_path_factory.mktemp("ro") / "catalog"
    shutil.copytree(DEMO, target)
    return target


@pytest.fixture(scope="module")
def api(ro_catalog: Path) -> Iterator[TestClient]:
    with client(ro_catalog) as c:
        yield c


@pytest.fixture(scope="module")
def demo_design(api: TestClient) -> dict[str, Any]:
    """The demo spec's rank-1 design, found through the API (top 1)."""
    r = api.post("/v1/design", json={"spec": demo_spec(), "top": 1})
    assert r.status_code == 200, r.text
    best = r.json()["candidates"][0]
    return {"spec": demo_spec(), "parts": {k: v["id"] for k, v in best["parts"].items()}}


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str) -> Any:
    capsys.readouterr()
    assert cli.main(list(argv)) == 0
    return json.loads(capsys.readouterr().out)


def without_elapsed(result: dict[str, Any]) -> dict[str, Any]:
    out = json.loads(json.dumps(result))
    out["search"].pop("elapsed_s")
    return out


def problem(response: Any, status: int) -> dict[str, Any]:
    """The RFC 9457 problem of an error answer, checked for the members every problem has."""
    assert response.status_code == status, response.text
    assert response.headers["content-type"] == "application/problem+json"
    body: dict[str, Any] = response.json()
    assert body["status"] == status
    assert isinstance(body["detail"], str) and body["detail"]
    assert body["type"] == "about:blank" or body["type"].startswith("/problems/")
    assert body["instance"] == response.request.url.path
    return body


def problems(response: Any) -> dict[str, str]:
    """field -> message of a 422 answer (its ``errors`` extension member)."""
    body = problem(response, 422)
    assert body["type"] == "/problems/invalid-request"
    return {item["field"]: item["msg"] for item in body["errors"]}


# ---- design -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("extra_cli", "extra_body"),
    [((), {}), (("--top", "2", "--by", "cost"), {"top": 2, "by": "cost"})],
)
def test_design_matches_cli_json(
    capsys: pytest.CaptureFixture[str],
    api: TestClient,
    ro_catalog: Path,
    extra_cli: tuple[str, ...],
    extra_body: dict[str, Any],
) -> None:
    expected = run_cli(
        capsys, "design", str(SPEC_FILE), "--catalog", str(ro_catalog), "--json", *extra_cli
    )
    r = api.post("/v1/design", json={"spec": demo_spec(), **extra_body})
    assert r.status_code == 200, r.text
    assert without_elapsed(r.json()) == without_elapsed(expected)
    assert r.headers["X-Search"] == "proven-optimal"
    if extra_body:
        assert len(r.json()["candidates"]) == 2
        assert r.json()["spec"]["ranking"] == {"by": "cost", "top": 2}


def test_infeasible_spec_is_200_with_reasons(api: TestClient) -> None:
    spec = demo_spec()
    spec["limits"]["max_cost"] = 0.01
    r = api.post("/v1/design", json={"spec": spec, "top": 1})
    assert r.status_code == 200
    body = r.json()
    assert body["candidates"] == []
    assert body["infeasible"]["reasons"]
    assert any("max_cost" in reason for reason in body["infeasible"]["reasons"])


def test_search_cut_by_time_limit_says_so(api: TestClient) -> None:
    r = api.post("/v1/design", json={"spec": demo_spec(), "time_limit_s": 1e-6})
    assert r.status_code == 200
    assert r.json()["search"]["proven_optimal"] is False
    assert r.json()["search"]["time_limit_s"] == 1e-6
    assert r.headers["X-Search"] == "cut-by-time-limit"


def test_time_limit_is_capped_by_the_server(api: TestClient, catalog_copy: Path) -> None:
    """As api/README.md says: larger values are cut to the cap (30 s by default), and the
    answer's search.time_limit_s is the limit used; non-positive or non-numbers are 422."""
    spec = demo_spec()
    spec["limits"]["max_cost"] = 0.01  # infeasible: answers fast
    r = api.post("/v1/design", json={"spec": spec, "time_limit_s": 1e6, "top": 1})
    assert (r.status_code, r.json()["search"]["time_limit_s"]) == (200, 30.0)
    for bad in (0, -1, True, "5"):
        assert "time_limit_s" in problems(
            api.post("/v1/design", json={"spec": spec, "time_limit_s": bad})
        )
    with client(catalog_copy, max_time_limit_s=0.2, default_time_limit_s=0.1) as c:
        r = c.post("/v1/design", json={"spec": spec, "time_limit_s": 25, "top": 1})
        assert r.status_code == 200
        assert r.json()["search"]["time_limit_s"] == 0.2
        r = c.post("/v1/design", json={"spec": spec, "top": 1})
        assert r.json()["search"]["time_limit_s"] == 0.1


def test_design_validation_names_the_field(api: TestClient) -> None:
    spec = demo_spec()
    spec["frequency"]["target_hz"] = -5
    assert "spec.frequency.target_hz" in problems(api.post("/v1/design", json={"spec": spec}))
    spec = demo_spec()
    spec["triangle"]["amplitud_vpp"] = spec["triangle"].pop("amplitude_vpp")
    found = problems(api.post("/v1/design", json={"spec": spec}))
    assert found["spec.triangle.amplitud_vpp"] == "unknown key (check the spelling)"
    assert "spec.triangle.amplitude_vpp" in found  # the misspelt key's real field is missing
    del spec["triangle"]
    assert "spec.triangle" in problems(api.post("/v1/design", json={"spec": spec}))
    found = problems(api.post("/v1/design", json={"spec": demo_spec(), "top": 0, "by": "x"}))
    assert {"top", "by"} <= set(found)
    assert "spec" in problems(api.post("/v1/design", json={"top": 1}))
    found = problems(api.post("/v1/design", json={"spec": demo_spec(), "colour": "red"}))
    assert found == {"colour": "unknown key (check the spelling)"}
    r = api.post("/v1/design", content=b"{not json", headers={"content-type": "application/json"})
    assert problem(r, 422)["errors"][0]["type"] == "json_invalid"


def test_top_above_the_server_cap_is_422(catalog_copy: Path) -> None:
    with client(catalog_copy, max_top=3) as c:
        assert "top" in problems(c.post("/v1/design", json={"spec": demo_spec(), "top": 4}))
        # without an override, the spec's own ranking.top is what is checked
        found = problems(c.post("/v1/design", json={"spec": demo_spec()}))
        assert "at most 3" in found["spec.ranking.top"]


# ---- analyse, simulate, reoptimise ---------------------------------------------------------


def test_analyse_matches_cli_json(
    capsys: pytest.CaptureFixture[str],
    api: TestClient,
    ro_catalog: Path,
    demo_design: dict[str, Any],
    tmp_path: Path,
) -> None:
    path = tmp_path / "design.json"
    path.write_text(json.dumps(demo_design), encoding="utf-8")
    argv = ("analyse", str(path), "--catalog", str(ro_catalog), "--json", "--samples", "3000")
    expected = run_cli(capsys, *argv, "--seed", "7", "--distribution", "uniform")
    body = {**demo_design, "samples": 3000, "seed": 7, "distribution": "uniform"}
    r = api.post("/v1/analyse", json=body)
    assert r.status_code == 200, r.text
    assert r.json() == expected


def test_analyse_of_a_tuned_range_matches_cli_json(
    capsys: pytest.CaptureFixture[str], api: TestClient, ro_catalog: Path, tmp_path: Path
) -> None:
    """A tuned design with a wiper and a selected range: the API and the CLI (DESIGN file with
    ``wiper`` and ``range``) analyse the same board."""
    spec = tomllib.loads(cli.example_spec_path("tuned").read_text(encoding="utf-8"))
    # the tuned search needs 5-12 s of CPU time: a loaded CI machine can pass the server's
    # 30 s cap, so this search gets a server that allows more (it ends as soon as it is done)
    with client(ro_catalog, max_time_limit_s=300.0) as patient:
        found = patient.post("/v1/design", json={"spec": spec, "top": 1, "time_limit_s": 300})
    assert found.status_code == 200, found.text
    assert found.json()["candidates"], found.json()["search"]
    parts = {k: v["id"] for k, v in found.json()["candidates"][0]["parts"].items()}
    assert "RV1" in parts and "C2" in parts
    design = {"spec": spec, "parts": parts, "wiper": 0.3, "range": "C2"}
    path = tmp_path / "tuned.json"
    path.write_text(json.dumps(design), encoding="utf-8")
    expected = run_cli(
        capsys, "analyse", str(path), "--catalog", str(ro_catalog), "--json", "--samples", "1000"
    )
    r = api.post("/v1/analyse", json={**design, "samples": 1000})
    assert r.status_code == 200, r.text
    assert r.json() == expected
    bad = api.post("/v1/simulate", json={**design, "range": "C9"})
    assert "range" in problems(bad)


def test_analyse_takes_parts_as_objects(api: TestClient, demo_design: dict[str, Any]) -> None:
    ids = demo_design["parts"]
    as_objects = {k: {"id": v, "display": "copied from a design answer"} for k, v in ids.items()}
    a = api.post("/v1/analyse", json={**demo_design, "samples": 500})
    b = api.post(
        "/v1/analyse", json={"spec": demo_design["spec"], "parts": as_objects, "samples": 500}
    )
    assert a.status_code == b.status_code == 200
    assert a.json() == b.json()


def test_analyse_part_errors_name_the_designator(
    api: TestClient, demo_design: dict[str, Any]
) -> None:
    parts = dict(demo_design["parts"])
    spec = demo_design["spec"]
    found = problems(
        api.post("/v1/analyse", json={"spec": spec, "parts": {**parts, "U1": "NOPE-1"}})
    )
    assert "'NOPE-1' is not in the catalog" in found["parts.U1"]
    found = problems(
        api.post("/v1/analyse", json={"spec": spec, "parts": {**parts, "U1": parts["R1"]}})
    )
    assert "is a Resistor, not a OpAmp" in found["parts.U1"]
    del parts["R2"]
    found = problems(api.post("/v1/analyse", json={"spec": spec, "parts": {**parts, "R9": "x"}}))
    assert set(found) == {"parts.R2", "parts.R9"}
    assert "samples" in problems(api.post("/v1/analyse", json={**demo_design, "samples": 0}))


def test_samples_above_the_server_cap_is_422(
    catalog_copy: Path, demo_design: dict[str, Any]
) -> None:
    with client(catalog_copy, max_samples=1000) as c:
        found = problems(c.post("/v1/analyse", json={**demo_design, "samples": 1001}))
    assert found == {"samples": "at most 1000"}


def test_simulate_matches_cli_json(
    capsys: pytest.CaptureFixture[str],
    api: TestClient,
    ro_catalog: Path,
    demo_design: dict[str, Any],
    tmp_path: Path,
) -> None:
    path = tmp_path / "design.json"
    path.write_text(json.dumps(demo_design), encoding="utf-8")
    expected = run_cli(
        capsys, "simulate", str(path), "--catalog", str(ro_catalog), "--json", "--periods", "4"
    )
    r = api.post("/v1/simulate", json={**demo_design, "periods": 4})
    assert r.status_code == 200, r.text
    assert r.json() == expected
    assert {"measured", "predicted", "t_s", "triangle_v", "square_v"} <= set(expected)


def test_simulate_caps_the_waveform(api: TestClient, demo_design: dict[str, Any]) -> None:
    r = api.post("/v1/simulate", json={**demo_design, "periods": 3, "max_points": 64})
    assert r.status_code == 200
    body = r.json()
    assert 0 < len(body["t_s"]) <= 64
    assert len(body["t_s"]) == len(body["triangle_v"]) == len(body["square_v"])
    assert "max_points" in problems(
        api.post("/v1/simulate", json={**demo_design, "max_points": 20001})
    )
    assert "periods" in problems(api.post("/v1/simulate", json={**demo_design, "periods": 0}))


def test_simulate_a_loop_that_cannot_oscillate_is_422(catalog_copy: Path) -> None:
    # An op amp so slow that the square never reaches mid-swing before the triangle turns
    # back: the simulation refuses it (SimulationError), which must be a 422, not a 500.
    opamps = catalog_copy / "opamps.csv"
    header = opamps.read_text(encoding="utf-8").splitlines()
    cols = next(line for line in header if line.startswith("id,")).split(",")
    row = dict.fromkeys(cols, "")
    row.update(
        id="TEST-SLUG",
        channels="2",
        supply_min_v="3",
        supply_max_v="36",
        swing_pos_v="1",
        swing_neg_v="1",
        slew_v_per_us="0.00001",
        gbw_hz="1e3",
        delay_s="1e-3",
        offset_v="1e-3",
        bias_a="1e-9",
        output_a="0.02",
        unit_cost="0.1",
        stock="10",
    )
    with opamps.open("a", encoding="utf-8") as f:
        f.write(",".join(row[c] for c in cols) + "\n")
    catalog = load_catalog(catalog_copy)
    r1 = next(r for r in catalog.resistors if r.value_ohm == 10_000)
    c1 = min(catalog.capacitors, key=lambda c: c.value_f)
    parts = {"U1": "TEST-SLUG", "R1": r1.id, "R2": r1.id, "R3": r1.id, "C1": c1.id}
    with client(catalog_copy) as c:
        r = c.post("/v1/simulate", json={"spec": demo_spec(), "parts": parts, "periods": 2})
    item = problem(r, 422)["errors"][0]
    assert item["type"] == "does_not_oscillate"
    assert item["field"] == "parts"


def test_reoptimise_matches_cli_json(
    capsys: pytest.CaptureFixture[str],
    api: TestClient,
    ro_catalog: Path,
    demo_design: dict[str, Any],
    tmp_path: Path,
) -> None:
    path = tmp_path / "design.json"
    path.write_text(json.dumps(demo_design), encoding="utf-8")
    gone = demo_design["parts"]["R3"]
    expected = run_cli(
        capsys,
        "reoptimise",
        str(path),
        "--catalog",
        str(ro_catalog),
        "--json",
        "--without",
        gone,
        "--top",
        "2",
        "--boards",
        "50",
    )
    body = {**demo_design, "without": [gone], "top": 2, "boards": 50}
    r = api.post("/v1/reoptimise", json=body)
    assert r.status_code == 200, r.text
    assert without_elapsed(r.json()) == without_elapsed(expected)
    first = r.json()["candidates"][0]
    assert "R3" in first["changed"]
    assert first["parts"]["R3"]["id"] != gone


def test_reoptimise_errors_name_the_field(api: TestClient, demo_design: dict[str, Any]) -> None:
    found = problems(api.post("/v1/reoptimise", json={**demo_design, "without": ["NOPE-2"]}))
    assert "'NOPE-2' is not in the catalog" in found["without"]
    parts = dict(demo_design["parts"])
    del parts["C1"]
    found = problems(api.post("/v1/reoptimise", json={"spec": demo_design["spec"], "parts": parts}))
    assert "parts.C1" in found
    assert "boards" in problems(api.post("/v1/reoptimise", json={**demo_design, "boards": 0}))


# ---- catalog ------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", KINDS)
def test_catalog_lists_every_part_with_its_columns(
    api: TestClient, ro_catalog: Path, kind: str
) -> None:
    parts = getattr(load_catalog(ro_catalog), kind)
    seen: list[dict[str, Any]] = []
    offset = 0
    while True:
        r = api.get(f"/v1/catalog/{kind}", params={"offset": offset, "limit": 200})
        assert r.status_code == 200
        page = r.json()
        assert page["total"] == len(parts)
        seen += page["items"]
        offset += 200
        if offset >= page["total"]:
            break
    assert [x["id"] for x in seen] == [p.id for p in parts]
    # the table's columns in table order, then the optional ones (blank: null)
    columns = [*COLUMNS[kind], *OPTIONAL_COLUMNS.get(kind, ())]
    for got in seen:
        assert list(got) == columns
    first = parts[0]
    assert seen[0] == {c: getattr(first, c) for c in columns}


def test_catalog_filters(api: TestClient, ro_catalog: Path) -> None:
    catalog = load_catalog(ro_catalog)

    def ids(kind: str, **params: Any) -> list[str]:
        r = api.get(f"/v1/catalog/{kind}", params={"limit": 500, **params})
        assert r.status_code == 200, r.text
        assert r.json()["total"] == len(r.json()["items"])
        return [x["id"] for x in r.json()["items"]]

    expect = [r.id for r in catalog.resistors if r.series == "E24" and 1e4 <= r.value_ohm <= 1e5]
    assert ids("resistors", series="e24", min_value=1e4, max_value=1e5) == expect
    assert expect  # the filter is not vacuous on the demo
    expect = [c.id for c in catalog.capacitors if c.dielectric == "PP" and c.stock > 0]
    assert ids("capacitors", dielectric="pp", in_stock=True) == expect
    assert ids("opamps", in_stock=False) == [o.id for o in catalog.opamps if o.stock == 0]
    assert ids("opamps", min_stock=300) == [o.id for o in catalog.opamps if o.stock >= 300]
    assert ids("pots", pot_kind="trimmer") == [p.id for p in catalog.pots if p.kind == "trimmer"]


def test_catalog_query_errors(api: TestClient, catalog_copy: Path) -> None:
    assert "series" in problems(api.get("/v1/catalog/capacitors", params={"series": "E24"}))
    assert "min_value" in problems(api.get("/v1/catalog/opamps", params={"min_value": 1}))
    assert "limit" in problems(api.get("/v1/catalog/resistors", params={"limit": 501}))
    assert "offset" in problems(api.get("/v1/catalog/resistors", params={"offset": -1}))
    assert "kind" in problems(api.get("/v1/catalog/inductors"))
    with client(catalog_copy, max_page=10) as c:
        assert (
            "at most 10" in problems(c.get("/v1/catalog/resistors", params={"limit": 11}))["limit"]
        )


def test_catalog_get_one_and_404(api: TestClient, ro_catalog: Path) -> None:
    catalog = load_catalog(ro_catalog)
    cap = catalog.capacitors[3]
    r = api.get(f"/v1/catalog/capacitors/{cap.id}")
    assert r.status_code == 200
    assert r.json() == {c: getattr(cap, c) for c in COLUMNS["capacitors"]}
    problem(api.get("/v1/catalog/capacitors/NO-SUCH-PART"), 404)
    wrong_kind = api.get(f"/v1/catalog/resistors/{cap.id}")  # exists, but is not a resistor
    assert cap.id in problem(wrong_kind, 404)["detail"]


# ---- stock writes -------------------------------------------------------------------------


def test_patch_refused_without_token_or_open_flag(catalog_copy: Path) -> None:
    before = (catalog_copy / "resistors.csv").read_bytes()
    part = load_catalog(catalog_copy).resistors[0]
    with client(catalog_copy) as c:
        r = c.patch(f"/v1/catalog/resistors/{part.id}", json={"stock": 5})
    assert r.status_code == 403
    assert "--allow-open-writes" in r.json()["detail"]
    assert (catalog_copy / "resistors.csv").read_bytes() == before


def test_patch_token_checks(catalog_copy: Path) -> None:
    part = load_catalog(catalog_copy).resistors[0]
    url = f"/v1/catalog/resistors/{part.id}"
    with client(catalog_copy, token="s3cret-token") as c:
        r = c.patch(url, json={"stock": 5})
        assert r.status_code == 401
        assert r.headers["WWW-Authenticate"] == "Bearer"
        r = c.patch(url, json={"stock": 5}, headers={"Authorization": "Bearer s3cret-tokeN"})
        assert r.status_code == 403
        r = c.patch(url, json={"stock": 5}, headers={"Authorization": "Basic s3cret-token"})
        assert r.status_code == 401
        assert load_catalog(catalog_copy).get(part.id).stock == part.stock
        r = c.patch(url, json={"stock": 5}, headers={"Authorization": "Bearer s3cret-token"})
        assert r.status_code == 200
        assert r.json()["stock"] == 5
    assert load_catalog(catalog_copy).get(part.id).stock == 5


def test_patch_set_adjust_and_never_below_zero(catalog_copy: Path) -> None:
    part = load_catalog(catalog_copy).capacitors[0]
    url = f"/v1/catalog/capacitors/{part.id}"
    with client(catalog_copy, allow_open_writes=True) as c:
        r = c.patch(url, json={"stock": 40})
        assert r.status_code == 200
        assert r.json() == {**{k: getattr(part, k) for k in COLUMNS["capacitors"]}, "stock": 40}
        r = c.patch(url, json={"stock_delta": -15})
        assert (r.status_code, r.json()["stock"]) == (200, 25)
        assert c.get(url).json()["stock"] == 25  # the server reloaded its own write
        before = (catalog_copy / "capacitors.csv").read_bytes()
        r = c.patch(url, json={"stock_delta": -26})
        assert r.status_code == 409
        assert "only 25 on hand" in r.json()["detail"]
        assert (catalog_copy / "capacitors.csv").read_bytes() == before
        assert set(problems(c.patch(url, json={"stock": 1, "stock_delta": 1}))) == {"body"}
        assert set(problems(c.patch(url, json={}))) == {"body"}
        assert "stock" in problems(c.patch(url, json={"stock": -1}))
        assert "stock" in problems(c.patch(url, json={"stock": 2.5}))
        assert c.patch("/v1/catalog/capacitors/NO-SUCH", json={"stock": 1}).status_code == 404
        assert c.patch(f"/v1/catalog/opamps/{part.id}", json={"stock": 1}).status_code == 404
    assert load_catalog(catalog_copy).get(part.id).stock == 25


# ---- reload and health ----------------------------------------------------------------------


def test_health_reports_the_catalog(api: TestClient, ro_catalog: Path) -> None:
    catalog = load_catalog(ro_catalog)
    body = api.get("/health").json()
    assert body["status"] == "ok"
    assert body["catalog"] == str(ro_catalog)
    assert body["counts"] == {k: len(getattr(catalog, k)) for k in KINDS}
    assert body["last_reload_error"] is None
    assert body["writes"] == "disabled"


def test_reload_on_change_and_keep_last_good(catalog_copy: Path) -> None:
    part = load_catalog(catalog_copy).opamps[0]
    url = f"/v1/catalog/opamps/{part.id}"
    table = catalog_copy / "opamps.csv"
    with client(catalog_copy) as c:
        assert c.get(url).json()["stock"] == part.stock
        set_stock(catalog_copy, part.id, part.stock + 7)  # another process edits the table
        assert c.get(url).json()["stock"] == part.stock + 7
        good = table.read_text(encoding="utf-8")
        table.write_text(good + "BAD-ROW,two,x,y\n", encoding="utf-8")
        health = c.get("/health").json()
        assert health["status"] == "degraded"
        assert any("opamps.csv:" in line for line in health["last_reload_error"])
        assert c.get(url).json()["stock"] == part.stock + 7  # still the last good catalog
        table.write_text(good, encoding="utf-8")
        health = c.get("/health").json()
        assert (health["status"], health["last_reload_error"]) == ("ok", None)


def test_no_catalog_at_all_is_503(tmp_path: Path) -> None:
    broken = tmp_path / "broken"
    shutil.copytree(BROKEN, broken)
    with client(broken) as c:
        health = c.get("/health")
        assert health.status_code == 503
        assert health.json()["status"] == "unavailable"
        assert health.json()["last_reload_error"]
        found = problem(c.get("/v1/catalog/resistors"), 503)
        assert found["type"] == "/problems/catalog-unavailable"
        assert "not available" in found["detail"]
        problem(c.post("/v1/design", json={"spec": demo_spec()}), 503)
