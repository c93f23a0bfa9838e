"""The spec's [circuit] section: defaults build today's circuit, each choice one variant."""

from __future__ import annotations

from typing import Any

import pytest

from tristock.spec.loading import SpecError, parse_spec

BASE: dict[str, Any] = {
    "supply": {"positive_v": 12.0, "negative_v": -12.0},
    "frequency": {"target_hz": 2500.0, "tolerance_pct": 2.0},
    "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 5.0},
}


def with_circuit(**circuit: Any) -> dict[str, Any]:
    return {**BASE, "circuit": circuit}


@pytest.mark.parametrize(
    ("circuit", "topology"),
    [
        ({}, "opamp_schmitt"),
        ({"schmitt": "comparator"}, "comparator_schmitt"),
        ({"clamp": "zener"}, "clamped_schmitt"),
        ({"duty_pct": 25}, "duty_schmitt"),
        ({"duty_pct": 50, "duty_tolerance_pct": 1}, "opamp_schmitt"),
        ({"topology": "any"}, "any"),
    ],
)
def test_each_choice_names_its_topology(circuit: dict[str, Any], topology: str) -> None:
    assert parse_spec(with_circuit(**circuit)).circuit.topology_name == topology


def test_no_circuit_section_is_todays_circuit() -> None:
    spec = parse_spec(BASE)
    assert spec.circuit.topology_name == "opamp_schmitt"
    assert spec.circuit.duty_band is None


def test_duty_band_in_percentage_points() -> None:
    assert parse_spec(with_circuit(duty_pct=30)).circuit.duty_band == pytest.approx((0.28, 0.32))
    band = parse_spec(with_circuit(duty_pct=50, duty_tolerance_pct=0.5)).circuit.duty_band
    assert band == pytest.approx((0.495, 0.505))


@pytest.mark.parametrize(
    ("circuit", "words"),
    [
        ({"schmitt": "comparator", "clamp": "zener"}, "one variant at a time"),
        ({"clamp": "zener", "duty_pct": 30}, "one variant at a time"),
        ({"topology": "any", "schmitt": "comparator"}, "drop schmitt = comparator"),
        ({"schmitt": "schmitt"}, "circuit.schmitt"),
        ({"duty_pct": 99}, "circuit.duty_pct"),
        ({"duty_tolerance_pct": 0}, "circuit.duty_tolerance_pct"),
        ({"wiring": "x"}, "circuit.wiring"),
    ],
)
def test_refusals_name_the_field(circuit: dict[str, Any], words: str) -> None:
    with pytest.raises(SpecError) as caught:
        parse_spec(with_circuit(**circuit))
    assert words in "; ".join(caught.value.lines)
