"""The spec: strict numbers (booleans and strings are never numbers), finite values, floors
below which the physics has nothing to work with, and files that cannot be read."""

from __future__ import annotations

import json
import math
import typing
from pathlib import Path
from typing import Any

import pytest
from pydantic import BaseModel

from tristock.designs import design
from tristock.examples import demo_catalog_dir
from tristock.spec import limits
from tristock.spec.loading import SpecError, parse_spec, read_mapping
from tristock.spec.model import MIN_AMPLITUDE_VPP, MIN_BAND_PCT, MIN_FREQUENCY_HZ, Spec
from tristock.stock.catalog import load_catalog

FIXED: dict[str, Any] = {
    "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
    "frequency": {"target_hz": 2500.0, "tolerance_pct": 2.0},
    "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 5.0},
    "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
    "build": {"boards": 10},
    "limits": {"max_cost": 1.5, "min_yield": 0.9},
    "ranking": {"top": 3},
    "trim": {"margin_pct": 10.0, "drift_after_trim_pct": 0.5},
}
TUNED: dict[str, Any] = {
    **{k: v for k, v in FIXED.items() if k not in ("frequency", "trim")},
    "tuning": {"low_hz": 10.0, "high_hz": 1000.0, "ranges": 2, "overlap_pct": 5.0},
}


def numeric_fields(model: type[BaseModel] = Spec, prefix: tuple[str, ...] = ()) -> list[tuple]:
    """Every field of the spec whose value may be a number, as a path of keys (found from the
    models, so that a field added later is covered too)."""
    out = []
    for name, info in model.model_fields.items():
        path = (*prefix, name)
        types = set()
        for t in (info.annotation, *typing.get_args(info.annotation)):
            types |= {t, *typing.get_args(t)}
        sections = [t for t in types if isinstance(t, type) and issubclass(t, BaseModel)]
        if sections:
            out += numeric_fields(sections[0], path)
        elif types & {float, int}:
            out.append(path)
    return out


NUMERIC = numeric_fields()


def with_value(path: tuple[str, ...], value: Any) -> dict[str, Any]:
    base = TUNED if path[0] == "tuning" else FIXED
    data = json.loads(json.dumps(base))
    node = data
    for key in path[:-1]:
        node = node.setdefault(key, {})
    node[path[-1]] = value
    return data


def error_of(data: dict[str, Any]) -> str:
    with pytest.raises(SpecError) as caught:
        parse_spec(data)
    return "; ".join(caught.value.lines)


def test_the_bases_are_valid_and_every_numeric_field_is_found() -> None:
    parse_spec(FIXED)
    parse_spec(TUNED)
    found = {".".join(p) for p in NUMERIC}
    assert {"frequency.target_hz", "triangle.amplitude_vpp", "build.boards", "ranking.top",
            "tuning.ranges", "limits.max_cost", "supply.reference_v"} <= found  # fmt: skip
    assert len(NUMERIC) == 25  # supply 4, frequency 2, triangle 2, environment 2, build 1,
    # limits 5, ranking 1, trim 2, tuning 4, circuit 2


@pytest.mark.parametrize("path", NUMERIC, ids=".".join)
@pytest.mark.parametrize("value", [True, False, "1", "12.0", "auto", None, [1.0], {"v": 1}])
def test_booleans_strings_and_others_are_not_numbers(path: tuple[str, ...], value: Any) -> None:
    if value == "auto" and path == ("tuning", "ranges"):
        return  # the one string a numeric field accepts
    if value is None and path in (("limits", "max_cost"), ("supply", "reference_v"),
                                  ("trim", "drift_after_trim_pct"),
                                  ("circuit", "duty_tolerance_pct")):  # fmt: skip
        return  # optional: null means "not given"
    message = error_of(with_value(path, value))
    assert ".".join(path) in message


@pytest.mark.parametrize("path", NUMERIC, ids=".".join)
@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_every_number_is_finite(path: tuple[str, ...], value: float) -> None:
    assert ".".join(path) in error_of(with_value(path, value))


def test_boolean_target_is_named_in_plain_words() -> None:
    message = error_of(with_value(("frequency", "target_hz"), True))
    assert message == "frequency.target_hz: expected a number, got a boolean (true)"


def test_integral_float_counts_are_whole_numbers() -> None:
    assert parse_spec(with_value(("build", "boards"), 100.0)).build.boards == 100
    assert parse_spec(with_value(("tuning", "ranges"), 3.0)).tuning.ranges == 3  # type: ignore[union-attr]
    assert "build.boards" in error_of(with_value(("build", "boards"), 100.5))
    assert "tuning.ranges" in error_of(with_value(("tuning", "ranges"), 2.5))


def test_trim_enabled_is_a_strict_boolean() -> None:
    assert "trim.enabled" in error_of(with_value(("trim", "enabled"), 1))
    assert "trim.enabled" in error_of(with_value(("trim", "enabled"), "yes"))


@pytest.mark.parametrize(
    ("path", "floor", "unit"),
    [
        (("triangle", "amplitude_vpp"), MIN_AMPLITUDE_VPP, "V"),
        (("frequency", "target_hz"), MIN_FREQUENCY_HZ, "Hz"),
        (("frequency", "tolerance_pct"), MIN_BAND_PCT, "%"),
        (("triangle", "tolerance_pct"), MIN_BAND_PCT, "%"),
        (("trim", "drift_after_trim_pct"), MIN_BAND_PCT, "%"),
        (("tuning", "low_hz"), MIN_FREQUENCY_HZ, "Hz"),
        (("supply", "positive_v"), 0.1, "V"),
        (("limits", "max_cost"), 1e-4, ""),
    ],
)
def test_floors_name_the_field_and_the_reason(
    path: tuple[str, ...], floor: float, unit: str
) -> None:
    for tiny in (5e-324, 1e-320, floor * 0.999):
        message = error_of(with_value(path, tiny))
        assert message.startswith(".".join(path) + ":")
        assert f"is below {floor:g}{' ' + unit if unit else ''}:" in message
    parse_spec(with_value(path, floor))  # the floor itself is usable


def test_negative_rail_is_zero_or_at_least_100_mv_below() -> None:
    assert "negative_v" in error_of(with_value(("supply", "negative_v"), -1e-320))
    assert "negative_v" in error_of(with_value(("supply", "negative_v"), -0.05))
    parse_spec(with_value(("supply", "negative_v"), -0.1))
    single = with_value(("supply", "negative_v"), 0.0)
    parse_spec(single)


def test_cost_and_top_ceilings() -> None:
    assert "limits.max_cost" in error_of(with_value(("limits", "max_cost"), 1e7))
    assert "ranking.top" in error_of(with_value(("ranking", "top"), limits.TOP[1] + 1))
    parse_spec(with_value(("ranking", "top"), limits.TOP[1]))


def test_the_search_takes_specs_at_the_floors() -> None:
    """At the floors the search answers (here: infeasible, with reasons); it used to divide by
    zero for a 5e-324 V amplitude."""
    data = with_value(("triangle", "amplitude_vpp"), MIN_AMPLITUDE_VPP)
    data["frequency"] = {"target_hz": MIN_FREQUENCY_HZ, "tolerance_pct": MIN_BAND_PCT}
    data["triangle"]["tolerance_pct"] = MIN_BAND_PCT
    del data["trim"]
    result = design(parse_spec(data), load_catalog(demo_catalog_dir()), time_limit_s=2.0)
    assert not result.candidates and result.infeasible and result.infeasible.reasons


# ---- files --------------------------------------------------------------------------------


def test_files_that_cannot_be_read(tmp_path: Path) -> None:
    cases: dict[str, bytes] = {
        "latin1.toml": "[supply]\n# r\xe9glage\n".encode("latin-1"),
        "deep.json": b"[" * 5000 + b"]" * 5000,
        "deep.toml": b"a = " + b"[" * 5000 + b"]" * 5000,
        "digits.json": b'{"a": ' + b"9" * 5000 + b"}",
        "list.json": b"[1, 2]",
        "bad.toml": b"[supply\n",
        "big.json": b" " * (limits.SPEC_FILE_MAX_BYTES + 1) + b"{}",
    }
    for name, raw in cases.items():
        path = tmp_path / name
        path.write_bytes(raw)
        with pytest.raises(SpecError) as caught:
            read_mapping(path)
        assert len(caught.value.lines) == 1 and caught.value.lines[0].startswith(str(path))
    for missing in (tmp_path / "absent.toml", tmp_path):
        with pytest.raises(SpecError) as caught:
            read_mapping(missing)
        assert str(missing) in caught.value.lines[0]


def test_nan_in_json_is_read_then_refused(tmp_path: Path) -> None:
    path = tmp_path / "nan.json"
    data = with_value(("frequency", "target_hz"), 1.0)
    path.write_text(json.dumps(data).replace("1.0", "NaN", 1), encoding="utf-8")
    with pytest.raises(SpecError):
        parse_spec(read_mapping(path))
