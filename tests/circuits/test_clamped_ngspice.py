"""The zener-clamped model against ngspice transient runs (reference: ngspice, Debian
package) of netlists generated from the parts under test: SPICE zener models (BV, IBV, NBV,
RS, IS from the diode table), the op-amp integrator macromodel and the delayed, slew-limited
comparator. Each case prints its errors (``pytest -s``) and records them as properties.
Held to 0.3 % in frequency and amplitude and 0.5 points of duty."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from tristock.circuits import TOPOLOGIES
from variant_harness import Case, Measured, board_case, check_case, measured_fixture

pytestmark = pytest.mark.ngspice

CLAMPED = TOPOLOGIES["clamped_schmitt"]


def clamped(
    parts: str, zeners: tuple[str, str], rails: tuple[float, float], temp_c: float = 25.0
) -> Case:
    names = ("U1", "R1", "R2", "R3", "R5", "C1")
    return board_case(CLAMPED, names, parts, {"D1": zeners[0], "D2": zeners[1]}, rails, temp_c)


CASES: dict[str, Case] = {
    # the demo board: 5.1 V pair on ±12 V, 2.4 kHz, 3 MHz op amp (integrator lag)
    "demo": clamped(
        "GA-JF2 R1F-10K0 R1F-22K1 R1F-47K5 R1F-2K00 CPPG-4N70", ("GD-Z5V1-02",) * 2, (12, -12)
    ),
    # unequal zeners (2.4 V up, 3.3 V down: duty 56 %) with a fast op amp on ±6 V, 17 kHz
    "asymmetric_fast": clamped(
        "GA-HS1 R1F-10K0 R1F-15K0 R1F-10K0 R1F-1K00 CC0-2N20",
        ("GD-Z2V4-05", "GD-Z3V3-05"),
        (6, -6),
    ),
    # single 12 V supply, mid-rail reference, 2.7 V pair
    "single_supply": clamped(
        "GA-RO2 R1F-10K0 R1F-33K2 R1F-22K1 R1F-1K00 CPPG-10N0", ("GD-Z2V7-02",) * 2, (12, 0)
    ),
    # 18 kHz with a 2 µs delay and 7 V/µs: the op amp's timing is 28 % of the period
    "delay_18k": clamped(
        "GA-LN2 R1F-10K0 R1F-22K1 R1F-10K0 R1F-2K00 CC0-2N20", ("GD-Z6V8-05",) * 2, (15, -15)
    ),
    # 10 V zeners at 70 °C (their tempco and the forward drop's move the levels)
    "hot_10v": clamped(
        "GA-JF2 R1F-21K5 R1F-33K2 R1F-100K R1F-1K00 CPPG-2N20",
        ("GD-Z10V0-02",) * 2,
        (15, -15),
        70.0,
    ),
}


measured = measured_fixture(CASES)


@pytest.mark.parametrize("name", sorted(CASES))
def test_clamped_model_matches_ngspice(
    name: str, measured: Measured, record_property: Callable[[str, object], None]
) -> None:
    # reference: ngspice transient run of the clamped netlist (limits in ``check_case``)
    check_case(name, CASES, measured, record_property)
