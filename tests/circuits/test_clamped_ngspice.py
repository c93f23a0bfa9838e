"""The zener-clamped model against ngspice transient runs (reference: ngspice, Debian
package) of netlists generated from the parts under test: SPICE zener models (BV, IBV, NBV,
RS, IS from the diode table), the op-amp integrator macromodel and the delayed, slew-limited
comparator. Each case prints its errors (``pytest -s``) and records them as properties.
Held to 0.3 % in frequency and amplitude and 0.5 points of duty."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from ngspice_harness import NgspiceError, require_ngspice
from tristock.circuits import TOPOLOGIES
from variant_harness import Case, case, errors, measure_all

pytestmark = pytest.mark.ngspice

CLAMPED = TOPOLOGIES["clamped_schmitt"]


def clamped(
    parts: str, zeners: tuple[str, str], rails: tuple[float, float], temp_c: float = 25.0
) -> Case:
    names = ("U1", "R1", "R2", "R3", "R5", "C1")
    ids = dict(zip(names, parts.split(), strict=True))
    return case(CLAMPED, {**ids, "D1": zeners[0], "D2": zeners[1]}, rails, temp_c)


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


@pytest.fixture(scope="module")
def measured() -> dict[str, dict[str, float] | NgspiceError]:
    require_ngspice()
    return measure_all(CASES)


@pytest.mark.parametrize("name", sorted(CASES))
def test_clamped_model_matches_ngspice(
    name: str,
    measured: dict[str, dict[str, float] | NgspiceError],
    record_property: Callable[[str, object], None],
) -> None:
    meas = measured[name]
    if isinstance(meas, NgspiceError):
        pytest.fail(f"{name}: {meas}")
    err = errors(CASES[name], meas)
    print(f"{name}: " + ", ".join(f"{k} {v:+.2e}" for k, v in err.items()))
    for key, value in err.items():
        record_property(key, value)
    # reference: ngspice transient run of the clamped netlist
    assert abs(err["frequency"]) <= 3e-3
    assert abs(err["amplitude"]) <= 3e-3
    assert abs(err["duty"]) <= 5e-3
