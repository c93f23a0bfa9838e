"""The circuits through the HTTP API: a ``[circuit]`` spec searched (a set duty too), its
answers naming their topology, a DESIGN body of any circuit analysed (``topology``) and a
variant's re-optimised, and the refusals as 422s naming the field."""

from __future__ import annotations

import tomllib
from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient
from test_api import DEMO, client

from tristock import cli
from tristock.circuits import TOPOLOGIES


@pytest.fixture(scope="module")
def api() -> Iterator[TestClient]:
    with client(DEMO) as c:
        yield c


def comparator_spec() -> dict[str, object]:
    text = cli.example_spec_path("comparator").read_text(encoding="utf-8")
    return tomllib.loads(text)


def test_a_set_duty_spec_is_searched_and_its_design_file_analysed(api: TestClient) -> None:
    text = cli.example_spec_path("duty").read_text(encoding="utf-8")
    found = api.post("/v1/design", json={"spec": tomllib.loads(text), "time_limit_s": 60})
    assert found.status_code == 200, found.text
    result = found.json()
    assert result["search"]["proven_optimal"]
    first = result["candidates"][0]
    assert first["topology"] == "duty_schmitt" and {"R3A", "R3B"} <= set(first["parts"])
    assert 0.18 <= first["predicted"]["duty_high"] <= 0.22
    analysed = api.post("/v1/analyse", json={**first["design_file"], "samples": 500})
    assert analysed.status_code == 200, analysed.text
    got = analysed.json()["predicted"]["duty_high"]
    assert got == pytest.approx(first["predicted"]["duty_high"], rel=1e-12)


def test_a_comparator_spec_is_searched_and_its_answers_analysed(api: TestClient) -> None:
    found = api.post("/v1/design", json={"spec": comparator_spec(), "time_limit_s": 60})
    assert found.status_code == 200, found.text
    result = found.json()
    assert result["search"]["proven_optimal"]
    first = result["candidates"][0]
    assert first["topology"] == "comparator_schmitt" and "U2" in first["parts"]
    # the DESIGN file as it comes, posted back: the same board analysed, the same prediction
    body = {**first["design_file"], "samples": 500}
    analysed = api.post("/v1/analyse", json=body)
    assert analysed.status_code == 200, analysed.text
    got = analysed.json()["predicted"]["frequency_hz"]
    assert got == pytest.approx(first["predicted"]["frequency_hz"], rel=1e-12)


def test_a_clamped_board_is_analysed_by_its_topology(api: TestClient) -> None:
    t = TOPOLOGIES["clamped_schmitt"]
    spec = {
        "supply": {"positive_v": 12.0, "negative_v": -12.0},
        "frequency": {"target_hz": 2400.0, "tolerance_pct": 5.0},
        "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 10.0},
    }
    body = {"spec": spec, "parts": dict(t.demo_board), "topology": t.name, "samples": 500}
    r = api.post("/v1/analyse", json=body)
    assert r.status_code == 200, r.text
    assert "D1" in r.json()["sensitivity"]["frequency"]


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"topology": "ring_oscillator"}, "topology"),
        ({"spec_circuit": {"duty_tolerance_pct": 2}}, "circuit.duty_tolerance_pct"),
    ],
)
def test_what_cannot_be_done_is_a_422_naming_the_field(
    api: TestClient, body: dict[str, object], field: str
) -> None:
    spec = comparator_spec()
    if "spec_circuit" in body:
        spec = {**spec, "circuit": body["spec_circuit"]}
        r = api.post("/v1/design", json={"spec": spec})
    else:
        parts = dict(TOPOLOGIES["comparator_schmitt"].demo_board)
        r = api.post("/v1/analyse", json={"spec": spec, "parts": parts, **body})
    assert r.status_code == 422, r.text
    assert any(e["field"].endswith(field) for e in r.json()["errors"]), r.json()


def test_a_clamped_board_is_reoptimised_without_its_zener(api: TestClient) -> None:
    """A DESIGN body of the zener clamp (``topology``) re-optimised with its zener withdrawn:
    D1 and D2 change together (one zener part, ``clamped_schmitt``'s stage options), each
    answer a board of the same circuit, proven (the fewest count's brute-force check is in
    tests/designs/test_reoptimise_variants.py)."""
    t = TOPOLOGIES["clamped_schmitt"]
    spec = {
        "supply": {"positive_v": 12.0, "negative_v": -12.0},
        "frequency": {"target_hz": 2400.0, "tolerance_pct": 5.0},
        "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 10.0},
    }
    zener = t.demo_board["D1"]
    body = {
        "spec": spec, "parts": dict(t.demo_board), "topology": t.name, "without": [zener],
        "time_limit_s": 30, "top": 2,
    }  # fmt: skip
    r = api.post("/v1/reoptimise", json=body)
    assert r.status_code == 200, r.text
    result = r.json()
    assert result["search"]["proven_optimal"]
    assert result["candidates"], result["infeasible"]
    for c in result["candidates"]:
        assert c["topology"] == t.name and {"D1", "D2"} <= set(c["changed"])
        assert c["parts"]["D1"]["id"] == c["parts"]["D2"]["id"] != zener


def test_a_set_duty_board_is_reoptimised_without_r3b(api: TestClient) -> None:
    """The set-duty example's rank 1 with its R3B withdrawn: every answer changes R3B and
    keeps the circuit, proven (brute force: tests/designs/test_duty_search_exact.py)."""
    spec = tomllib.loads(cli.example_spec_path("duty").read_text(encoding="utf-8"))
    found = api.post("/v1/design", json={"spec": spec, "time_limit_s": 60}).json()
    parts = {d: p["id"] for d, p in found["candidates"][0]["parts"].items()}
    body = {"spec": spec, "parts": parts, "topology": "duty_schmitt",
            "without": [parts["R3B"]], "time_limit_s": 60, "top": 2}  # fmt: skip
    r = api.post("/v1/reoptimise", json=body)
    assert r.status_code == 200, r.text
    result = r.json()
    assert result["search"]["proven_optimal"]
    assert result["candidates"], result["infeasible"]
    for c in result["candidates"]:
        assert c["topology"] == "duty_schmitt" and "R3B" in c["changed"]
        assert c["parts"]["R3B"]["id"] != parts["R3B"]
