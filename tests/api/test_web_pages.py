"""The workbench's pages and ``/ui`` routes without a browser (FastAPI's TestClient): every
spec field is on the form under its API path, the page names no other origin, the docs page
uses the vendored Swagger UI, figures are labelled SVG with units, and the spec and DESIGN
conversions round-trip."""

from __future__ import annotations

import os
import re
import tomllib
import warnings
from collections.abc import Iterator
from typing import Any

import pytest
from tristock.api.app import create_app
from tristock.api.settings import Settings
from tristock.api.web.specform import spec_form

from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.spec.model import Spec

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

#: Any absolute URL; XML namespace names are identifiers, never fetched.
URL = re.compile(r"""(?:https?:)?//[A-Za-z0-9.-]+\.[A-Za-z]{2,}""")
NAMESPACES = ("//www.w3.org/",)


@pytest.fixture(scope="module")
def api() -> Iterator[TestClient]:
    with pytest.MonkeyPatch.context() as mp:
        for name in [k for k in os.environ if k.upper().startswith("TRISTOCK_")]:
            mp.delenv(name)
        app = create_app(Settings(catalog_dir=demo_catalog_dir()))
        with TestClient(app, raise_server_exceptions=False) as c:
            yield c


def demo_spec() -> dict[str, Any]:
    return tomllib.loads(example_spec_path("demo").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def rank1(api: TestClient) -> dict[str, Any]:
    r = api.post("/v1/design", json={"spec": demo_spec(), "top": 1})
    assert r.status_code == 200, r.text
    candidate: dict[str, Any] = r.json()["candidates"][0]
    return candidate


def body_of(candidate: dict[str, Any]) -> dict[str, Any]:
    f = candidate["design_file"]
    return {k: f[k] for k in ("spec", "parts", "wiper", "range")}


def leaf_paths(model: type[Spec]) -> set[str]:
    """Every section.field of the Spec, read from the pydantic models themselves."""
    out = set()
    for section, info in model.model_fields.items():
        args = [a for a in getattr(info.annotation, "__args__", (info.annotation,)) if a]
        sub = next(a for a in args if isinstance(a, type) and hasattr(a, "model_fields"))
        out |= {f"{section}.{name}" for name in sub.model_fields}
    return out


def foreign_urls(text: str) -> list[str]:
    return [u for u in URL.findall(text) if not u.startswith(NAMESPACES) and "w3.org" not in u]


def test_the_form_has_every_spec_field_once(api: TestClient) -> None:
    page = api.get("/").text
    names = re.findall(r'name="([a-z_]+\.[a-z_]+)"', page)
    assert sorted(names) == sorted(leaf_paths(Spec))
    for path in names:
        fid = "f-" + path.replace(".", "-")
        assert f'<label for="{fid}"' in page  # a label for every field
        assert f'id="err-{fid}"' in page  # and a place for its error beside it
    assert {s.name for s in spec_form() if s.optional} == {"frequency", "trim", "tuning"}


def test_the_page_and_its_files_name_no_other_origin(api: TestClient) -> None:
    page = api.get("/")
    assert page.status_code == 200
    assert "default-src 'self'" in page.headers["content-security-policy"]
    files = re.findall(r'(?:src|href)="(/[^"]+)"', page.text)
    assert "/ui/static/workbench.js" in files and "/ui/static/workbench.css" in files
    assert foreign_urls(page.text) == []
    total = len(page.content)
    for path in files:
        r = api.get(path)
        assert r.status_code == 200, path
        assert foreign_urls(r.text) == [], path
        total += len(r.content)
    assert total <= 150 * 1024  # the first load's budget, uncompressed


def test_docs_use_the_vendored_swagger_ui(api: TestClient) -> None:
    page = api.get("/docs")
    assert page.status_code == 200
    scripts = re.findall(r'(?:src|href)="(/[^"]+)"', page.text)
    assert "/ui/swagger/swagger-ui-bundle.js" in scripts
    assert foreign_urls(page.text) == []
    for path in scripts:
        assert api.get(path).status_code == 200, path
    assert api.get("/redoc").status_code == 404  # its page would load a CDN script
    assert "/ui/figures/waveform.svg" not in api.get("/openapi.json").json()["paths"]


def test_figures_are_labelled_svg_with_units(api: TestClient, rank1: dict[str, Any]) -> None:
    body = body_of(rank1)
    wave = api.post("/ui/figures/waveform.svg", json=body)
    assert wave.status_code == 200, wave.text
    assert wave.headers["content-type"].startswith("image/svg+xml")
    assert wave.text.startswith('<svg role="img" aria-label="Waveforms')
    assert re.search(r"time \((ns|µs|ms|s)\)", wave.text) and "voltage to ground (V)" in wave.text
    hist = api.post("/ui/figures/histograms.svg", json={**body, "samples": 2000, "seed": 3})
    assert hist.status_code == 200, hist.text
    assert "frequency (Hz)" in hist.text and "triangle amplitude (Vpp)" in hist.text
    analysed = api.post("/v1/analyse", json={**body, "samples": 2000, "seed": 3}).json()
    # the histogram's yield is the analysis's yield for the same draws
    assert f"yield {100 * analysed['yield']['fraction']:.2f} %" in hist.text


def test_a_bad_figure_body_is_the_apis_422(api: TestClient, rank1: dict[str, Any]) -> None:
    body = body_of(rank1)
    body["spec"] = {**body["spec"], "frequency": {"target_hz": "fast", "tolerance_pct": 2.0}}
    r = api.post("/ui/figures/waveform.svg", json=body)
    assert r.status_code == 422
    assert ["body", "spec", "frequency", "target_hz"] in [e["loc"] for e in r.json()["errors"]]


def test_spec_toml_round_trips(api: TestClient) -> None:
    spec = demo_spec()
    r = api.post("/ui/spec.toml", json={"spec": spec})
    assert r.status_code == 200, r.text
    assert Spec.model_validate(tomllib.loads(r.text)) == Spec.model_validate(spec)


def test_design_file_round_trips_and_bad_text_is_named(
    api: TestClient, rank1: dict[str, Any]
) -> None:
    saved = rank1["design_file"]
    text = api.post("/ui/design.toml", json=saved).text
    back = api.post("/ui/design.json", json={"text": text})
    assert back.status_code == 200, back.text
    assert back.json()["parts"] == saved["parts"]
    assert Spec.model_validate(back.json()["spec"]) == Spec.model_validate(saved["spec"])
    bad = api.post("/ui/design.json", json={"text": "parts = ["})
    assert bad.status_code == 422
    assert bad.json()["errors"][0]["loc"] == ["body", "text"]


def test_dial_law_draws_a_tuned_candidates_ranges(api: TestClient) -> None:
    ranges = [
        {
            "capacitor": "C1",
            "low_hz": 100.0,
            "high_hz": 1000.0,
            "guaranteed_low_hz": 95.0,
            "guaranteed_high_hz": 1050.0,
        }
    ]
    law = {"wiper": [0.0, 0.5, 1.0], "C1": [1100.0, 300.0, 90.0]}
    tuning = {"control": "series", "ranges": ranges, "dial_law": law}
    r = api.post("/ui/figures/dial-law.svg", json={"tuning": tuning, "wanted_hz": [100, 1000]})
    assert r.status_code == 200, r.text
    assert "pot rotation (% of travel)" in r.text and "frequency (Hz)" in r.text
