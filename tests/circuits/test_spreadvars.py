"""The spread-variable declarations (``circuits.spreadvars``): the four laws, bad declarations,
and the variables the next circuits need (zener voltage tolerance and tempco, zener dynamic
resistance, diode drop spread, pull-up tolerance, a comparator's delay, rise, fall, offset and
bias, R3A/R3B), declared on a point that has their fields. Expected values are the laws of
the module docstring worked out by hand (common practice: value·(1 + tol·z) for a tolerance,
value·(1 + tc·ΔT) for a ppm tempco, V + (mV/°C)·ΔT for a junction's drift)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest

from tristock.circuits.rails import Rails
from tristock.circuits.spreadvars import (
    FieldMove,
    SpreadVariable,
    added,
    part_tempcos,
    part_tolerances,
    rail_tolerances,
    scaled,
    temperature,
    tolerance,
)
from tristock.examples import demo_catalog_dir
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import load_catalog
from tristock.stock.parts import Capacitor, Resistor


@dataclass(frozen=True)
class VariantPoint:
    """Fields of the three variants of the next circuit issue."""

    r3a: float = 100e3
    r3b: float = 47e3
    r5: float = 4.7e3  # pull-up or clamp series resistor
    vz: float = 5.1
    rz: float = 30.0
    vf: float = 0.65
    delay: float = 200e-9
    rise: float = 50e-9
    fall: float = 30e-9
    vos2: float = 0.0
    ib2: float = 25e-9


def variant_variables() -> list[SpreadVariable]:
    return [
        tolerance("R3A", "r3a", 100e3, 0.01, "Ω"),
        tolerance("R3B", "r3b", 47e3, 0.01, "Ω"),
        tolerance("R5", "r5", 4.7e3, 0.05, "Ω"),  # pull-up tolerance
        tolerance("D1", "vz", 5.1, 0.02, "V"),  # zener voltage tolerance
        scaled("D1.rz", ("rz",), 0.5, lambda z: f"{30 * (1 + 0.5 * z):.3g} Ω"),
        added("D3.vf", ("vf",), 0.05, lambda z: f"{0.65 + 0.05 * z:.3f} V"),  # drop spread
        scaled("U2.delay", ("delay",), 0.3, str),
        scaled("U2.edges", ("rise", "fall"), 0.25, str),
        added("U2.offset", ("vos2",), 2e-3, str),
        scaled("U2.bias", ("ib2",), 1.0, str),
        temperature(-20.0, 70.0, {"r3a": 100.0, "r3b": -50.0}, {"vz": 2e-3, "vf": -2e-3}),
    ]


def test_every_variant_variable_moves_its_fields_by_its_law() -> None:
    point = VariantPoint()
    variables = variant_variables()
    z = np.array([[1.0] * len(variables), [-0.5] * len(variables)])
    values = {f: np.asarray(getattr(point, f), dtype=float) for f in point.__dataclass_fields__}
    for i, var in enumerate(variables):
        var.apply(values, z[:, i])
    moved = VariantPoint(**values)  # type: ignore[arg-type]
    hot, cold = 70.0 - 25.0, (25.0 - 0.5 * 45.0) - 25.0  # T at z = 1 and z = -0.5
    r3a = [100e3 * 1.01 * (1 + 100e-6 * hot), 100e3 * 0.995 * (1 + 100e-6 * cold)]
    r3b = [47e3 * 1.01 * (1 - 50e-6 * hot), 47e3 * 0.995 * (1 - 50e-6 * cold)]
    np.testing.assert_allclose(moved.r3a, r3a, rtol=1e-15)
    np.testing.assert_allclose(moved.r3b, r3b, rtol=1e-15)
    np.testing.assert_allclose(moved.r5, [4.7e3 * 1.05, 4.7e3 * 0.975], rtol=1e-15)
    vz = [5.1 * 1.02 + 2e-3 * hot, 5.1 * 0.99 + 2e-3 * cold]
    np.testing.assert_allclose(moved.vz, vz, rtol=1e-15)
    np.testing.assert_allclose(moved.rz, [45.0, 22.5], rtol=1e-15)
    np.testing.assert_allclose(moved.vf, [0.70 - 2e-3 * hot, 0.625 - 2e-3 * cold], rtol=1e-14)
    np.testing.assert_allclose(moved.delay, [260e-9, 170e-9], rtol=1e-15)
    np.testing.assert_allclose(moved.rise, [62.5e-9, 43.75e-9], rtol=1e-15)
    np.testing.assert_allclose(moved.fall, [37.5e-9, 26.25e-9], rtol=1e-15)
    np.testing.assert_allclose(moved.vos2, [2e-3, -1e-3], rtol=1e-15)
    np.testing.assert_allclose(moved.ib2, [50e-9, 12.5e-9], rtol=1e-15)


def test_descriptions_name_the_value_at_a_deviation() -> None:
    assert tolerance("R5", "r5", 10e3, 0.05, "Ω").describe(-1.0) == "9.5 kΩ (-5 %)"
    assert temperature(-20.0, 70.0, {}).describe(1.0) == "70 °C"
    assert temperature(-20.0, 70.0, {}).describe(-1.0) == "-20 °C"


def test_bad_declarations_are_refused() -> None:
    with pytest.raises(ValueError, match="law: 'square' is not one of"):
        FieldMove("r1", "square", 0.1)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="T2: a tempco move needs the temperature"):
        SpreadVariable("T2", (FieldMove("r1", "tempco", 100.0),), str)


def test_temperature_is_one_shared_variable() -> None:
    t = temperature(0.0, 50.0, {"r1": 25.0, "r2": 25.0}, {"vz": 1e-3})
    assert t.temperature == (25.0, 25.0) and t.fields == ("r1", "r2", "vz")
    assert [m.law for m in t.moves] == ["tempco", "tempco", "tempco_abs"]
    values = {"r1": np.array([10e3]), "r2": np.array([20e3]), "vz": np.array([5.1])}
    t.apply(values, np.array([1.0]))
    # equal tempcos track: the ratio R1/R2 does not move with temperature
    assert values["r1"][0] / values["r2"][0] == pytest.approx(0.5, rel=1e-15)
    assert values["vz"][0] == pytest.approx(5.1 + 25e-3, rel=1e-15)


def test_the_shared_builders_read_the_catalog_and_the_spec() -> None:
    """``part_tolerances``, ``part_tempcos``, ``rail_tolerances`` on demo parts (the values
    are the catalog's columns and the spec's fields, restated)."""
    demo = load_catalog(demo_catalog_dir())
    r1, c_film, c_x7r = demo.get("R1F-10K0"), demo.get("CPPG-4N70"), demo.get("CX7-1N00")
    assert isinstance(r1, Resistor)
    assert isinstance(c_film, Capacitor) and isinstance(c_x7r, Capacitor)
    assert c_x7r.is_class_ii and c_x7r.temp_band_pct
    parts = {"R1": ("r1", r1), "C1": ("c1", c_film), "C2": ("c2", c_x7r)}
    variables = {v.name: v for v in part_tolerances(parts)}
    assert list(variables) == ["R1", "C1", "C2", "C2.temp"]
    assert variables["R1"].moves == (FieldMove("r1", "scale", r1.tolerance_pct / 100),)
    assert variables["C2.temp"].moves == (FieldMove("c2", "scale", c_x7r.temp_band_pct / 100),)
    assert part_tempcos(parts) == {"r1": r1.tempco_ppm, "c1": c_film.tempco_ppm, "c2": 0.0}

    def spec(v_neg: float, tol: float) -> Spec:
        return parse_spec(
            {
                "supply": {"positive_v": 12.0, "negative_v": v_neg, "tolerance_pct": tol},
                "frequency": {"target_hz": 1e3, "tolerance_pct": 2.0},
                "triangle": {"amplitude_vpp": 2.0, "tolerance_pct": 5.0},
            }
        )

    split = rail_tolerances(spec(-12.0, 5.0), Rails(12.0, -12.0))
    assert [(v.name, v.rail, v.moves) for v in split] == [
        ("V+", True, (FieldMove("v_pos", "scale", 0.05),)),
        ("V-", True, (FieldMove("v_neg", "scale", 0.05),)),
    ]
    assert [v.name for v in rail_tolerances(spec(0.0, 5.0), Rails(12.0, 0.0))] == ["V+"]
    assert rail_tolerances(spec(-12.0, 0.0), Rails(12.0, -12.0)) == []
