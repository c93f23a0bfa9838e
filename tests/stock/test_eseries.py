"""Tests for tristock.stock.eseries: the IEC 60063 tables and the look-ups over decades."""

from __future__ import annotations

import math

import eseries as reference
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tristock.stock.eseries import (
    SERIES,
    is_member,
    nearest,
    parse_series,
    series_names,
    series_of,
    values,
)

NAMES = ["E6", "E12", "E24", "E48", "E96", "E192"]


def reference_figures(name: str) -> tuple[int, ...]:
    """The series as integer figures from the `eseries` package, e.g. E24 -> (10, 11, ..., 91)."""
    return tuple(reference.series(getattr(reference, name)))


def reference_figure_set(name: str) -> set[float]:
    """The `eseries` package's figures scaled into [1, 10), as the floats of those decimals."""
    figures = reference_figures(name)
    digits = len(str(figures[0]))
    return {float(f"{f}e-{digits - 1}") for f in figures}


# --- the tables ---------------------------------------------------------------------------


def test_series_names_coarsest_first() -> None:
    assert series_names() == NAMES
    assert list(SERIES) == NAMES


@pytest.mark.parametrize("name", NAMES)
def test_table_equals_eseries_package(name: str) -> None:
    # source: eseries package (its tables follow IEC 60063)
    figures = reference_figures(name)
    digits = len(str(figures[0]))
    assert tuple(round(v * 10 ** (digits - 1)) for v in SERIES[name]) == figures
    # and every stored figure is exactly the float of the standard's decimal (3.0, not 2.9999)
    assert SERIES[name] == tuple(float(f"{f}e-{digits - 1}") for f in figures)


@pytest.mark.parametrize("name", NAMES)
def test_table_shape(name: str) -> None:
    table = SERIES[name]
    assert len(table) == int(name[1:])
    assert table[0] == 1.0
    assert all(1.0 <= v < 10.0 for v in table)
    assert list(table) == sorted(set(table))


def test_e24_spot_values() -> None:
    # IEC 60063 E24, from memory: the members that are not rounded geometric numbers
    for figure in (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1):
        assert figure in SERIES["E24"]
    # IEC 60063 E24, from memory: the geometric values these replace are not members
    for geometric in (2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6, 8.3):
        assert geometric not in SERIES["E24"]
    # the geometric sequence 10**(i/24) to two figures differs from the table at those places
    geometric_table = tuple(round(10 ** (i / 24), 1) for i in range(24))
    assert geometric_table != SERIES["E24"]


def test_e192_has_9_20() -> None:
    # source: eseries package; 10**(185/192) = 9.19..., but the standard's table has 9.20
    assert 920 in reference_figures("E192")
    assert 9.20 in SERIES["E192"]
    assert 9.19 not in SERIES["E192"]
    assert round(10 ** (185 / 192), 2) == 9.19


def test_nesting() -> None:
    # IEC 60063, from memory: each of E6..E24 holds the coarser ones, likewise E48..E192
    for coarse, fine in (("E6", "E12"), ("E12", "E24"), ("E48", "E96"), ("E96", "E192")):
        assert set(SERIES[coarse]) <= set(SERIES[fine])
    # but the two-figure series are not inside the three-figure ones (2.7 vs 2.67, 2.71)
    assert not set(SERIES["E24"]) <= set(SERIES["E192"])


# --- values() ------------------------------------------------------------------------------


def test_values_inclusive_both_ends() -> None:
    got = values("E12", 10, 100)
    assert got[0] == 10.0
    assert got[-1] == 100.0
    assert len(got) == 13


def test_values_are_exact_decimals() -> None:
    got = values("E12", 1e3, 1e4)
    assert 4700.0 in got
    assert got == [float(f"{f}e2") for f in reference_figures("E12")] + [1e4]
    small = values("E24", 1e-12, 9.9e-12)
    assert small == [float(f"{f}e-13") for f in reference_figures("E24")]
    assert 4.7e-12 in small


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(("low", "high"), [(1.0, 10.0), (1e-12, 1e-9), (3.3e3, 4.7e5), (0.5, 0.5)])
def test_values_match_eseries_erange(name: str, low: float, high: float) -> None:
    # source: eseries package (erange is inclusive of both ends too)
    expected = list(reference.erange(getattr(reference, name), low, high))
    got = values(name, low, high)
    assert len(got) == len(expected)
    assert all(math.isclose(a, b, rel_tol=1e-12) for a, b in zip(got, expected, strict=True))


def test_values_end_tolerance() -> None:
    # an end that is a member up to float noise still counts as that member
    assert values("E12", 4700 * (1 + 1e-12), 4700 * (1 + 1e-12)) == [4700.0]
    assert values("E12", 4700 * (1 + 1e-6), 5000) == []


def test_values_one_member_interval_and_empty_interval() -> None:
    assert values("E6", 2.2, 2.2) == [2.2]
    assert values("E6", 2.3, 3.2) == []


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (("E12", 100, 10), "above high"),
        (("E12", 0, 10), "must be positive"),
        (("E12", -1, 10), "must be positive"),
        (("E12", 1, math.inf), "not a finite number"),
        (("E12", math.nan, 10), "not a finite number"),
        (("E13", 1, 10), "'E13': unknown E-series"),
        (("e12", 1, 10), "'e12': unknown E-series"),
    ],
)
def test_values_errors(args: tuple[str, float, float], fragment: str) -> None:
    with pytest.raises(ValueError, match=fragment):
        values(*args)


# --- nearest() -------------------------------------------------------------------------------


def test_nearest_spot_values() -> None:
    assert nearest("E12", 4700.0) == 4700.0
    assert nearest("E12", 4650.0) == 4700.0
    assert nearest("E12", 1.09) == 1.0
    assert nearest("E12", 1.11) == 1.2
    assert nearest("E24", 9.5) == 9.1  # 0.4 below, 0.5 above
    assert nearest("E24", 9.6) == 10.0  # across the decade edge
    assert nearest("E12", 0.0095) == 0.01
    assert nearest("E96", 1e-9) == 1e-9
    assert nearest("E192", 9.2e3 * 1.001) == 9.2e3


def test_nearest_tie_goes_lower() -> None:
    # 1.25 and 12.5 are exactly midway between E6 members 1.0 and 1.5 (exact in binary)
    assert nearest("E6", 1.25) == 1.0
    assert nearest("E6", 12.5) == 10.0


@settings(max_examples=300, deadline=None)
@given(
    name=st.sampled_from(NAMES),
    value=st.floats(min_value=1e-13, max_value=1e13, allow_nan=False, allow_infinity=False),
)
def test_nearest_matches_eseries_find_nearest(name: str, value: float) -> None:
    # source: eseries package (find_nearest minimises |member - value|, as nearest() does)
    expected = reference.find_nearest(getattr(reference, name), value)
    got = nearest(name, value)
    if not math.isclose(got, expected, rel_tol=1e-12):
        # only an exact tie could part them; check both are equally close
        assert math.isclose(abs(got - value), abs(expected - value), rel_tol=1e-9)


@pytest.mark.parametrize("value", [0.0, -4.7, math.nan, math.inf])
def test_nearest_rejects_non_positive(value: float) -> None:
    with pytest.raises(ValueError, match="value"):
        nearest("E12", value)


def test_nearest_unknown_series_lists_known() -> None:
    with pytest.raises(ValueError, match=r"'E7': unknown E-series; known series: E6, E12, .*E192"):
        nearest("E7", 10.0)


# --- series_of() and is_member() -------------------------------------------------------------


def test_series_of_spot_values() -> None:
    # IEC 60063, from memory (4.7 is in E192 as 470 but not in E48/E96; 2.7 is only in E12/E24)
    assert series_of(4700.0) == ["E6", "E12", "E24", "E192"]
    assert series_of(2.7e-9) == ["E12", "E24"]
    assert series_of(1.1) == ["E24", "E48", "E96", "E192"]
    assert series_of(9.2e5) == ["E192"]
    assert series_of(1.25) == []
    assert series_of(0.0) == []
    assert series_of(-4700.0) == []


@settings(max_examples=200, deadline=None)
@given(
    name=st.sampled_from(NAMES),
    index=st.integers(min_value=0, max_value=191),
    decade=st.integers(min_value=-13, max_value=12),
)
def test_series_of_matches_eseries_tables(name: str, index: int, decade: int) -> None:
    # source: eseries package; a value is in series S iff its figure is in S's table
    figures = sorted(reference_figure_set(name))
    figure = figures[index % len(figures)]
    value = float(f"{figure!r}e{decade}")
    expected = [n for n in NAMES if figure in reference_figure_set(n)]
    assert series_of(value) == expected
    assert name in expected


def test_is_member_tolerance() -> None:
    assert is_member("E12", 4700.0)
    assert is_member("E12", 4.7 * 1e3)
    assert is_member("E12", 4700 * (1 + 1e-10))
    assert not is_member("E12", 4700 * (1 + 1e-6))
    assert is_member("E12", 4700 * (1 + 1e-6), tolerance=1e-5)
    assert not is_member("E12", 4750.0)
    assert is_member("E12", 1e-15)
    assert not is_member("E12", 0.0)


def test_is_member_errors() -> None:
    with pytest.raises(ValueError, match="not a finite number"):
        is_member("E12", math.nan)
    with pytest.raises(ValueError, match="tolerance"):
        is_member("E12", 4700.0, tolerance=-1.0)
    with pytest.raises(ValueError, match="'E5': unknown E-series"):
        is_member("E5", 4700.0)


def test_members_near_decade_edges() -> None:
    # log10 rounding at the exact decade edges must not drop or invent members
    for decade in range(-15, 16):
        edge = float(f"1e{decade}")
        assert series_of(edge) == NAMES
        assert nearest("E192", edge) == edge
        assert nearest("E192", math.nextafter(edge, 0.0)) == edge
        assert not is_member("E6", edge * 0.995)


# --- parse_series() ---------------------------------------------------------------------------


@pytest.mark.parametrize(("text", "name"), [("E24", "E24"), ("e24", "E24"), (" E192 ", "E192")])
def test_parse_series(text: str, name: str) -> None:
    assert parse_series(text) == name


@pytest.mark.parametrize("text", ["E25", "24", "", "E 24", "E3", "EE24"])
def test_parse_series_rejects(text: str) -> None:
    with pytest.raises(ValueError) as info:
        parse_series(text)
    assert str(info.value).startswith(repr(text) + ":")
    assert "E6, E12, E24, E48, E96, E192" in str(info.value)
