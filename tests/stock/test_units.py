"""Tests for tristock.stock.units: parsing and formatting component values."""

from __future__ import annotations

import math
from decimal import Decimal

import eseries as reference
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tristock.stock.units import format_code, format_value, parse_value

# --- parse_value: the accepted forms ------------------------------------------------------------


@pytest.mark.parametrize("text", ["0.1", "1000", "1e-9", "1.5E3", ".5", "5.", "+3", "0", "2.2e-6"])
def test_plain_numbers_match_python_float(text: str) -> None:
    # source: Python's float() (correctly rounded decimal conversion)
    assert parse_value(text) == float(text)


@settings(max_examples=300)
@given(
    whole=st.integers(min_value=0, max_value=10**12),
    fraction=st.text("0123456789", max_size=8),
    point=st.booleans(),
    sign=st.sampled_from(["", "+", "-"]),
)
def test_short_decimals_take_the_same_value_as_the_decimal_steps(
    whole: int, fraction: str, point: bool, sign: str
) -> None:
    # source: Python's decimal module (exact below its 28 digits), then float(); the short
    # plain decimals (most table cells) skip those steps and must give the same bits
    text = sign + str(whole) + ("." + fraction if point else "")
    expected = float(Decimal(text))
    got = parse_value(text, allow_negative=True)
    assert got == expected and math.copysign(1.0, got) == math.copysign(1.0, expected)


# SI prefixes, SI Brochure (BIPM), from memory; "meg" is the circuit-simulator spelling of mega
# (common practice).
SI_CASES = [
    ("4.7k", 4.7e3),
    ("10n", 10e-9),
    ("2.2u", 2.2e-6),
    ("4.7\u00b5", 4.7e-6),  # MICRO SIGN
    ("4.7\u03bc", 4.7e-6),  # GREEK SMALL LETTER MU
    ("1M", 1e6),
    ("100p", 100e-12),
    ("3.3m", 3.3e-3),
    ("1G", 1e9),
    ("2T", 2e12),
    ("5f", 5e-15),
    ("1meg", 1e6),
    ("1Meg", 1e6),
    ("2.2MEG", 2.2e6),
    ("4.7K", 4.7e3),
]


@pytest.mark.parametrize(("text", "value"), SI_CASES)
def test_si_prefixes(text: str, value: float) -> None:
    assert parse_value(text) == value


def test_milli_and_mega_are_case_sensitive() -> None:
    # SI Brochure, from memory: m = 1e-3, M = 1e6
    assert parse_value("1m") == 1e-3
    assert parse_value("1M") == 1e6
    assert parse_value("1meg") == 1e6


# IEC 60062, from memory: the multiplier letter stands for the decimal point.
IEC_60062_CASES = [
    ("4k7", 4.7e3),
    ("4K7", 4.7e3),
    ("R47", 0.47),
    ("0R1", 0.1),
    ("4R7", 4.7),
    ("47R", 47.0),
    ("100R", 100.0),
    ("1M0", 1e6),
    ("2M2", 2.2e6),
    ("8k25", 8.25e3),
    ("1G0", 1e9),
    ("2n2", 2.2e-9),
    ("10n0", 10e-9),
    ("4n7", 4.7e-9),
    ("6p8", 6.8e-12),
    ("u47", 0.47e-6),
    ("1u0", 1e-6),
    ("3m3", 3.3e-3),
    ("2\u00b52", 2.2e-6),
]


@pytest.mark.parametrize(("text", "value"), IEC_60062_CASES)
def test_iec_60062_codes(text: str, value: float) -> None:
    assert parse_value(text) == value


def test_codes_and_prefixes_agree_exactly() -> None:
    # the same decimal written three ways gives one float, with no rounding noise
    assert parse_value("4k7") == parse_value("4.7k") == parse_value("4700") == 4700.0
    assert parse_value("2n2") == parse_value("2.2n") == parse_value("2.2e-9") == 2.2e-9


def test_e_is_an_exponent_not_a_code_letter() -> None:
    assert parse_value("4E7") == 4e7
    with pytest.raises(ValueError, match="exponent"):
        parse_value("E47")


UNIT_CASES = [
    ("4.7k\u03a9", 4.7e3),  # GREEK CAPITAL LETTER OMEGA
    ("4.7k\u2126", 4.7e3),  # OHM SIGN
    ("4.7kohm", 4.7e3),
    ("4.7 k\u03a9", 4.7e3),
    ("100 \u03a9", 100.0),
    ("1Mohms", 1e6),
    ("4k7\u03a9", 4.7e3),
    ("4R7ohm", 4.7),
    ("10nF", 10e-9),
    ("2n2F", 2.2e-9),
    ("12V", 12.0),
    ("10mA", 10e-3),
    ("1MHz", 1e6),
    ("1mHz", 1e-3),
    ("10ns", 10e-9),
    ("1megohm", 1e6),
]


@pytest.mark.parametrize(("text", "value"), UNIT_CASES)
def test_trailing_units(text: str, value: float) -> None:
    assert parse_value(text) == value


def test_surrounding_whitespace_ignored() -> None:
    assert parse_value("  4k7\t") == 4700.0


def test_negative_needs_permission() -> None:
    with pytest.raises(ValueError, match=r"'-4k7': negative values are not allowed"):
        parse_value("-4k7")
    assert parse_value("-4k7", allow_negative=True) == -4700.0
    assert parse_value("-1.5e-3V", allow_negative=True) == -1.5e-3


# --- parse_value: rejected text ------------------------------------------------------------------

MALFORMED = [
    ("4k7k", "two multiplier letters"),
    ("4kk", "two multiplier letters"),
    ("1mM", "two multiplier letters"),
    ("", "empty value"),
    ("   ", "empty value"),
    ("1.2.3", "more than one decimal point"),
    ("4,7k", "use a point, not a comma"),
    ("1,000", "use a point, not a comma"),
    ("nan", "not a finite number"),
    ("NaN", "not a finite number"),
    ("inf", "not a finite number"),
    ("-Infinity", "not a finite number"),
    ("1e400", "too large"),
    ("1e-400", "too small"),
    ("1e3k", "an exponent and a multiplier letter"),
    ("4.7k7", "a code letter already marks the decimal point"),
    ("4k7.5", "a decimal point after the multiplier letter"),
    ("4E", "'E' is read as an exponent"),
    ("4r7", "IEC 60062 uses 'R'"),
    ("10uH", "unknown multiplier or unit 'H'"),
    ("1N", "did you mean 'n'"),
    ("4R7F", "'R' marks ohms, not F"),
    ("k", "no digits"),
    ("\u03a9", "no digits"),
    ("-", "no digits"),
    ("4.7  k", "unexpected space"),
    ("1 2", "unexpected space"),
    ("4k\u03a9\u03a9", "unknown multiplier or unit"),
    ("0x10", "unknown multiplier or unit 'x'"),
    ("4.7kV5", "unknown multiplier or unit 'V'"),
    ("4-7", "not a number, an SI-prefixed number or an IEC 60062 code"),
    ("4k-7", "not a number, an SI-prefixed number or an IEC 60062 code"),
]


@pytest.mark.parametrize(("text", "reason"), MALFORMED)
def test_malformed_text_is_quoted_with_reason(text: str, reason: str) -> None:
    with pytest.raises(ValueError) as info:
        parse_value(text, allow_negative=True)
    message = str(info.value)
    assert message.startswith(repr(text) + ": ")
    assert reason in message


def test_non_string_is_a_type_error() -> None:
    with pytest.raises(TypeError, match="must be a str"):
        parse_value(4.7)  # type: ignore[arg-type]


# --- format_value --------------------------------------------------------------------------------

# Engineering notation with SI prefixes, common practice.
FORMAT_CASES = [
    ((4700, "\u03a9"), "4.7 k\u03a9"),
    ((1e-8, "F"), "10 nF"),
    ((0, "\u03a9"), "0 \u03a9"),
    ((4.7e-6, "F"), "4.7 \u00b5F"),
    ((2.2e-12, "F"), "2.2 pF"),
    ((1.0, "V"), "1 V"),
    ((999.96, "\u03a9"), "1 k\u03a9"),  # rounding to 3 figures carries into the next prefix
    ((1e15, "\u03a9"), "1000 T\u03a9"),  # beyond the prefixes the end prefix stays
    ((-4700, ""), "-4.7k"),
    ((0.5, ""), "500m"),
    ((1000, ""), "1k"),
    ((0, ""), "0"),
]


@pytest.mark.parametrize(("args", "text"), FORMAT_CASES)
def test_format_value(args: tuple[float, str], text: str) -> None:
    assert format_value(*args) == text


def test_format_value_digits() -> None:
    assert format_value(12345.678, "Hz", digits=6) == "12.3457 kHz"
    assert format_value(12345.678, "Hz", digits=1) == "10 kHz"
    assert format_value(4.75e3, "\u03a9", digits=2) == "4.8 k\u03a9"


@pytest.mark.parametrize("digits", [0, -1])
def test_format_value_bad_digits(digits: int) -> None:
    with pytest.raises(ValueError, match="digits"):
        format_value(1.0, digits=digits)


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_format_value_rejects_non_finite(value: float) -> None:
    with pytest.raises(ValueError, match="not a finite number"):
        format_value(value, "F")


positive_floats = st.floats(min_value=1e-18, max_value=1e18, allow_nan=False, allow_infinity=False)


@settings(max_examples=300, deadline=None)
@given(value=positive_floats, unit=st.sampled_from(["", "\u03a9", "F", "Hz", "V"]))
def test_format_value_round_trips_at_full_precision(value: float, unit: str) -> None:
    # 17 significant figures identify a double uniquely (IEEE 754, from memory)
    assert parse_value(format_value(value, unit, digits=17)) == value


@settings(max_examples=300, deadline=None)
@given(value=positive_floats, digits=st.integers(min_value=1, max_value=6))
def test_format_value_rounds_to_digits(value: float, digits: int) -> None:
    # source: Python's own rounding to significant figures in "%.Ne" formatting
    assert parse_value(format_value(value, "F", digits)) == float(f"{value:.{digits - 1}e}")


# --- format_code ---------------------------------------------------------------------------------

# IEC 60062, from memory.
CODE_CASES = [
    ((4700, "resistor"), "4k7"),
    ((0.47, "resistor"), "R47"),
    ((0.01, "resistor"), "R01"),
    ((4.7, "resistor"), "4R7"),
    ((47, "resistor"), "47R"),
    ((0, "resistor"), "0R"),
    ((1e6, "resistor"), "1M"),
    ((8250, "resistor"), "8k25"),
    ((2.2e9, "resistor"), "2G2"),
    ((2.2e-9, "capacitor"), "2n2"),
    ((1e-7, "capacitor"), "100n"),
    ((4.7e-13, "capacitor"), "p47"),
    ((6.8e-12, "capacitor"), "6p8"),
    ((4.7e-7, "capacitor"), "470n"),
    ((2.2e-6, "capacitor"), "2u2"),
    ((1.5e-3, "capacitor"), "1m5"),
]


@pytest.mark.parametrize(("args", "code"), CODE_CASES)
def test_format_code(args: tuple[float, str], code: str) -> None:
    value, kind = args
    assert format_code(value, kind) == code  # type: ignore[arg-type]
    assert parse_value(code) == value


def test_format_code_defaults_to_resistor_and_three_digits() -> None:
    assert format_code(4700) == "4k7"
    assert format_code(4753) == "4k75"
    assert format_code(4753, digits=4) == "4k753"
    assert format_code(999.6) == "1k"


@pytest.mark.parametrize(
    ("value", "kind", "fragment"),
    [
        (-4700, "resistor", "no sign"),
        (math.nan, "resistor", "not a finite number"),
        (math.inf, "capacitor", "not a finite number"),
        (0.0, "capacitor", "positive value"),
        (1.5, "capacitor", "too large for a capacitor code"),
        (1e16, "resistor", "too large for a resistor code"),
        (9.996e14, "resistor", "too large for a resistor code"),  # rounds up to 1000 T
        (1e-6, "inductor", "kind 'inductor'"),
    ],
)
def test_format_code_errors(value: float, kind: str, fragment: str) -> None:
    with pytest.raises(ValueError, match=fragment):
        format_code(value, kind)  # type: ignore[arg-type]


def e192_values(decades: range) -> list[float]:
    """Every E192 value over ``decades``, from the `eseries` package's table as decimals."""
    figures = reference.series(reference.E192)
    return [float(f"{f}e{d - 2}") for d in decades for f in figures]


@pytest.mark.parametrize(
    ("kind", "decades"), [("resistor", range(-3, 13)), ("capacitor", range(-15, -1))]
)
def test_format_code_round_trips_e192(kind: str, decades: range) -> None:
    # values: E192, source: eseries package
    for value in e192_values(decades):
        code = format_code(value, kind)  # type: ignore[arg-type]
        assert math.isclose(parse_value(code), value, rel_tol=1e-12), (value, code)


@settings(max_examples=300, deadline=None)
@given(
    value=st.floats(min_value=1e-4, max_value=9e14, allow_nan=False, allow_infinity=False),
    digits=st.integers(min_value=1, max_value=8),
)
def test_format_code_rounds_to_digits(value: float, digits: int) -> None:
    # source: Python's own rounding to significant figures in "%.Ne" formatting
    code = format_code(value, "resistor", digits)
    assert parse_value(code) == float(f"{value:.{digits - 1}e}")
    assert sum(ch.isalpha() for ch in code) == 1
