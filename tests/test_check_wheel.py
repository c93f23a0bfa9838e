"""The wheel checker's rules (``tests/check_wheel.py``, run on the real wheel by CI) against
listings that break them: each rule must be able to fail."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from check_wheel import expected_files, metadata_version, wheel_problems

DIST_INFO = "tristock-0.1.0.dist-info"
METADATA_24 = "Metadata-Version: 2.4\nName: tristock\nVersion: 0.1.0\nLicense-Expression: MIT\n"


def good_listing() -> list[str]:
    return [*sorted(expected_files()), f"{DIST_INFO}/METADATA", f"{DIST_INFO}/RECORD"]


def test_the_source_tree_promises_the_package_api_catalog_and_examples() -> None:
    wanted = expected_files()
    assert {
        "tristock/py.typed",
        "tristock/__main__.py",
        "tristock/api/app.py",
        "tristock/api/routers/design.py",
        "tristock/api/web/templates/index.html",
        "tristock/api/web/static/workbench.js",
        "tristock/demo_catalog/resistors.csv",
        "tristock/demo_catalog/capacitors.csv",
        "tristock/demo_catalog/opamps.csv",
        "tristock/demo_catalog/pots.csv",
        "tristock/examples/demo.toml",
        "tristock/examples/trimmed.toml",
        "tristock/examples/tuned.toml",
    } <= wanted
    assert not any(name.startswith("api/") for name in wanted)


def test_a_complete_wheel_passes() -> None:
    assert wheel_problems(good_listing(), METADATA_24, expected_files()) == []


@pytest.mark.parametrize(
    ("change", "said"),
    [
        (lambda names: [*names, "api/__init__.py"], "top-level entry 'api'"),
        (lambda names: [*names, "api.py"], "top-level entry 'api.py'"),
        (lambda names: [n for n in names if n != "tristock/py.typed"], "missing tristock/py.typed"),
        (
            lambda names: [n for n in names if not n.startswith("tristock/api/")],
            "missing tristock/api/app.py",
        ),
        (
            lambda names: [n for n in names if "demo_catalog" not in n],
            "missing tristock/demo_catalog/opamps.csv",
        ),
        (
            lambda names: [n for n in names if n != "tristock/examples/tuned.toml"],
            "missing tristock/examples/tuned.toml",
        ),
        (lambda names: [*names, "tristock/demo_catalog/.tristock.lock"], "stray file"),
        (lambda names: [*names, "tristock/demo_catalog/.tristock-writes.jsonl"], "stray file"),
        (lambda names: [*names, "tristock/api/__pycache__/app.cpython-311.pyc"], "stray file"),
        (lambda names: [*names, "tristock/demo_catalog/.resistors.csv.x1.tmp"], "stray file"),
    ],
)
def test_each_broken_listing_is_named(change: Callable[[list[str]], list[str]], said: str) -> None:
    problems = wheel_problems(change(good_listing()), METADATA_24, expected_files())
    assert any(said in problem for problem in problems), problems


def test_old_metadata_with_a_license_expression_is_refused() -> None:
    # License-Expression is defined from core metadata 2.4 on (PEP 639).
    old = METADATA_24.replace("Metadata-Version: 2.4", "Metadata-Version: 2.1")
    assert metadata_version(old) == (2, 1)
    problems = wheel_problems(good_listing(), old, expected_files())
    assert problems == ["Metadata-Version 2.1 does not define License-Expression"]
    no_license = METADATA_24.replace("License-Expression: MIT\n", "")
    assert wheel_problems(good_listing(), no_license, expected_files()) == [
        "no License-Expression in METADATA"
    ]
