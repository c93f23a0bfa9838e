"""The set-duty model against ngspice transient runs (reference: ngspice, Debian package) of
netlists generated from the parts under test: SPICE diode models (IS, N, RS from the diode
table), the op-amp macromodels (the comparator a gm stage with its transport delay when the
part's GBW is finite). Duty 20 %, 50 % and 80 %, a Schottky pair on a single supply, a fast
op amp at -20 °C. Held to 0.3 % in frequency and amplitude and 0.5 points of duty; each case
prints its errors (``pytest -s``) and records them as properties."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from tristock.circuits import TOPOLOGIES
from variant_harness import Case, Measured, board_case, check_case, measured_fixture

pytestmark = pytest.mark.ngspice

DUTY = TOPOLOGIES["duty_schmitt"]


def steered(
    parts: str, diodes: tuple[str, str], rails: tuple[float, float], temp_c: float = 25.0
) -> Case:
    names = ("U1", "R1", "R2", "R3A", "R3B", "C1")
    return board_case(DUTY, names, parts, {"D3": diodes[0], "D4": diodes[1]}, rails, temp_c)


CASES: dict[str, Case] = {
    "duty_20": steered(
        "GA-JF2 R1F-10K0 R1F-22K1 R1F-22K1 R1F-88K7 CPPG-4N70", ("GD-SW1",) * 2, (12, -12)
    ),
    "duty_50": steered(
        "GA-JF2 R1F-10K0 R1F-22K1 R1F-47K5 R1F-47K5 CPPG-4N70", ("GD-SW1",) * 2, (12, -12)
    ),
    # 4.3 kHz with a 2 µs delay: the op amp's timing is 11 % of the period
    "duty_80": steered(
        "GA-LN2 R1F-10K0 R1F-27K4 R1F-100K R1F-24K9 CPPG-2N20", ("GD-SW1",) * 2, (15, -15)
    ),
    # Schottky steering on a single 12 V supply: their reverse leakage is 1 % of a branch
    "schottky_single": steered(
        "GA-RO2 R1F-10K0 R1F-22K1 R1F-33K2 R1F-49K9 CPPG-10N0", ("GD-SK1",) * 2, (12, 0)
    ),
    # 41 kHz, 100 MHz op amp on ±5 V, at -20 °C
    "fast_cold": steered(
        "GA-HS1 R1F-10K0 R1F-15K0 R1F-4K75 R1F-10K0 CC0-1N00", ("GD-SW1",) * 2, (5, -5), -20.0
    ),
}


measured = measured_fixture(CASES)


@pytest.mark.parametrize("name", sorted(CASES))
def test_duty_model_matches_ngspice(
    name: str, measured: Measured, record_property: Callable[[str, object], None]
) -> None:
    # reference: ngspice transient run of the set-duty netlist (limits in ``check_case``)
    check_case(name, CASES, measured, record_property)


def test_the_cases_span_the_duty_range() -> None:
    duties = sorted(float(c.oscillator().prediction().duty_high) for c in CASES.values())
    assert duties[0] < 0.25 and duties[-1] > 0.75
