"""Parse and format component values: plain numbers, SI prefixes and IEC 60062 codes.

Accepted forms (``parse_value``), all giving a float in SI base units (ohm, farad, ...):

- plain numbers: "0.1", "1000", "1e-9", "1.5E3";
- a number and an SI prefix, value = number * 10**exponent: "4.7k" = 4700, "10n" = 1e-8,
  "2.2u" = 2.2e-6. Prefixes: f (-15), p (-12), n (-9), u, µ or μ (-6), m (-3, milli), k or K (3),
  M (6, mega), "meg"/"Meg"/"MEG" (6, mega, as in circuit simulators), G (9), T (12). Case
  matters: "m" is milli, "M" is mega;
- IEC 60062 letter-and-digit codes, where the multiplier letter stands for the decimal point:
  "4k7" = 4.7e3, "R47" = 0.47, "2n2" = 2.2e-9, "u47" = 0.47e-6. "R" is the ohms' decimal point
  (multiplier 1); "E" is never a code letter because "4E7" reads as the exponent form 4e7;
- any of the above followed by a unit: Ω (or "ohm"/"ohms"), F, V, A, Hz, s, optionally after one
  space: "4.7kΩ", "4.7 kΩ", "10nF", "1MHz". "R" codes take only ohms.

Decimal arithmetic builds each value, so "4.7k", "4k7" and "4700" all give exactly 4700.0.
"""

from __future__ import annotations

import math
import re
from decimal import Decimal
from typing import Literal

CodeKind = Literal["resistor", "capacitor"]

#: Multiplier letters and their powers of ten.
PREFIXES: dict[str, int] = {
    "f": -15,
    "p": -12,
    "n": -9,
    "u": -6,
    "\u00b5": -6,  # MICRO SIGN
    "\u03bc": -6,  # GREEK SMALL LETTER MU
    "m": -3,
    "R": 0,
    "k": 3,
    "K": 3,
    "M": 6,
    "G": 9,
    "T": 12,
}
_MEG = ("meg", "Meg", "MEG")

#: Unit symbols accepted after a value, longest first so "ohms" wins over "s".
_OHM = "\u03a9"  # GREEK CAPITAL LETTER OMEGA, what keyboards and most text produce
_OHM_SIGN = "\u2126"  # OHM SIGN, the compatibility character some tools emit
_UNITS = ("ohms", "Ohms", "ohm", "Ohm", "Hz", _OHM, _OHM_SIGN, "F", "V", "A", "s")
_OHM_UNITS = frozenset({"ohms", "Ohms", "ohm", "Ohm", _OHM, _OHM_SIGN})

_LETTERS = "".join(PREFIXES)
_NUMBER = r"(?:\d+\.?\d*|\.\d+)"
_PLAIN = re.compile(
    rf"(?P<num>{_NUMBER})(?P<exp>[eE][+-]?\d+)?(?P<space> ?)(?P<pre>meg|Meg|MEG|[{_LETTERS}])?"
)
_CODE = re.compile(rf"(?P<int>\d*)(?P<letter>[{_LETTERS}])(?P<frac>\d+)")
#: A plain decimal of at most ``_SHORT`` characters: Decimal would hold it exactly (fewer than
#: its 28 digits), so float() of the text is the same value, without the Decimal steps.
_DECIMAL = re.compile(r"\d+\.?\d*|\.\d+")
_SHORT = 20
_EXPONENT = re.compile(r"\d[eE][+-]?\d")


def _fail(text: str, why: str) -> ValueError:
    return ValueError(f"{text!r}: {why}")


def _split_unit(body: str) -> tuple[str, str]:
    """``body`` without its trailing unit symbol, and that symbol ("" when there is none)."""
    for unit in _UNITS:
        if body.endswith(unit) and len(body) > len(unit):
            return body[: -len(unit)], unit
    return body, ""


def _diagnose(text: str, core: str) -> ValueError:
    """Why ``core`` (the text without sign and unit) is not a value, as a ValueError."""
    if not any(ch.isdigit() for ch in core):
        return _fail(text, "no digits")
    if core.count(".") > 1:
        return _fail(text, "more than one decimal point")
    if any(ch.isspace() for ch in core):
        return _fail(text, "unexpected space")
    letters = core
    for meg in _MEG:
        letters = letters.replace(meg, "k")
    exponent = _EXPONENT.search(letters)
    if exponent:
        letters = letters[: exponent.start() + 1] + letters[exponent.end() :]
    multipliers = [ch for ch in letters if ch in PREFIXES]
    if len(multipliers) > 1:
        return _fail(text, "two multiplier letters")
    if exponent and multipliers:
        return _fail(text, "an exponent and a multiplier letter together")
    for ch in letters:
        if ch in "eE":
            return _fail(text, "'E' is read as an exponent and needs digits on both sides")
        if ch == "r":
            return _fail(text, "'r' is not a code letter; IEC 60062 uses 'R'")
        if ch.isalpha() and ch not in PREFIXES:
            hint = f" (did you mean {ch.lower()!r}?)" if ch.lower() in PREFIXES else ""
            return _fail(text, f"unknown multiplier or unit {ch!r}{hint}")
    if "." in core and multipliers and core.index(".") > core.index(multipliers[0]):
        return _fail(text, "a decimal point after the multiplier letter")
    if "." in core and multipliers:
        return _fail(text, "a code letter already marks the decimal point; drop the '.'")
    return _fail(text, "not a number, an SI-prefixed number or an IEC 60062 code")


def parse_value(text: str, *, allow_negative: bool = False) -> float:
    """The value written in ``text``, as a float in SI base units (see the module docstring).

    ``"4.7k"`` -> 4700.0, ``"4k7"`` -> 4700.0, ``"R47"`` -> 0.47, ``"10nF"`` -> 1e-08,
    ``"1meg"`` -> 1e6 (meg/Meg are mega, m is milli). Surrounding whitespace is ignored. A
    leading "-" is accepted only with ``allow_negative=True``.

    Raises ValueError quoting ``text`` and saying why, e.g. "'4k7k': two multiplier letters",
    "'': empty value", "'4,7k': use a point, not a comma"; TypeError if ``text`` is not a str.
    """
    if not isinstance(text, str):
        raise TypeError(f"value must be a str, got {type(text).__name__}: {text!r}")
    body = text.strip()
    if not body:
        raise _fail(text, "empty value")
    if "," in body:
        raise _fail(text, "use a point, not a comma")
    if body.lower().lstrip("+-") in {"nan", "inf", "infinity"}:
        raise _fail(text, "not a finite number")
    sign = 1
    if body[0] in "+-":
        if body[0] == "-":
            if not allow_negative:
                raise _fail(text, "negative values are not allowed here")
            sign = -1
        body = body[1:]
    if len(body) <= _SHORT and _DECIMAL.fullmatch(body) and float(body) != 0.0:
        return sign * float(body)  # most table cells; a zero takes the checks below
    core, unit = _split_unit(body)

    plain = _PLAIN.fullmatch(core)
    code = None if plain else _CODE.fullmatch(core)
    if plain:
        prefix = plain["pre"] or ""
        if plain["space"] and not (prefix or unit):
            raise _fail(text, "unexpected trailing space")
        if plain["exp"] and prefix:
            raise _fail(text, "an exponent and a multiplier letter together")
        exponent = 6 if prefix in _MEG else PREFIXES.get(prefix, 0)
        magnitude = Decimal(plain["num"] + (plain["exp"] or "")).scaleb(exponent)
        letter = prefix
    elif code:
        letter = code["letter"]
        magnitude = Decimal(f"{code['int'] or '0'}.{code['frac']}").scaleb(PREFIXES[letter])
    else:
        raise _diagnose(text, core)
    if letter == "R" and unit and unit not in _OHM_UNITS:
        raise _fail(text, f"'R' marks ohms, not {unit}")

    value = sign * float(magnitude)
    if not math.isfinite(value):
        raise _fail(text, "too large to represent")
    if value == 0 and magnitude != 0:
        raise _fail(text, "too small to represent")
    return value


#: Prefixes used when formatting, by power of ten.
_FORMAT_PREFIXES: dict[int, str] = {
    -15: "f",
    -12: "p",
    -9: "n",
    -6: "\u00b5",  # MICRO SIGN
    -3: "m",
    0: "",
    3: "k",
    6: "M",
    9: "G",
    12: "T",
}

_CODE_LETTERS: dict[str, dict[int, str]] = {
    "resistor": {0: "R", 3: "k", 6: "M", 9: "G", 12: "T"},
    "capacitor": {-12: "p", -9: "n", -6: "u", -3: "m"},
}


def _rounded(value: float, digits: int) -> Decimal:
    """``value`` rounded to ``digits`` significant figures, as an exact Decimal."""
    if isinstance(digits, bool) or not isinstance(digits, int) or digits < 1:
        raise ValueError(f"digits {digits!r}: must be an integer >= 1")
    if not math.isfinite(value):
        raise ValueError(f"value {value!r}: not a finite number")
    return Decimal(f"{value:.{digits - 1}e}")


def _engineering_power(magnitude: Decimal, powers: list[int]) -> int:
    """The largest of ``powers`` (multiples of three) not above the magnitude's exponent, or the
    smallest one when the magnitude is below them all."""
    exponent = magnitude.adjusted()
    fitting = [p for p in powers if p <= exponent]
    return max(fitting) if fitting else min(powers)


def _plain(magnitude: Decimal) -> str:
    """A Decimal as fixed-point text without trailing zeros: 4.700 -> "4.7", 1E+1 -> "10"."""
    text = format(magnitude.normalize(), "f")
    return "0" if text in {"0", "-0"} else text


def format_value(value: float, unit: str = "", digits: int = 3) -> str:
    """``value`` in engineering notation: mantissa * 10**(3k) with the SI prefix for 10**(3k).

    The mantissa is rounded to ``digits`` significant figures and trailing zeros are trimmed:
    ``format_value(4700, "Ω") == "4.7 kΩ"``, ``format_value(1e-8, "F") == "10 nF"``,
    ``format_value(0, "Ω") == "0 Ω"``. With a unit the number and "prefix+unit" are separated by
    a space; without one the prefix follows the number directly ("4.7k"). Micro is "µ". Values
    beyond the prefixes f..T keep the end prefix ("1000 TΩ"). ``parse_value`` reads the result.
    """
    magnitude = _rounded(value, digits)
    if magnitude == 0:
        return f"0 {unit}" if unit else "0"
    power = _engineering_power(abs(magnitude), sorted(_FORMAT_PREFIXES))
    number = _plain(magnitude.scaleb(-power))
    prefix = _FORMAT_PREFIXES[power]
    return f"{number} {prefix}{unit}" if unit else f"{number}{prefix}"


def format_code(value: float, kind: CodeKind = "resistor", digits: int = 3) -> str:
    """The IEC 60062 letter-and-digit code for ``value``: the multiplier letter for 10**(3k)
    takes the place of the decimal point in the mantissa value / 10**(3k).

    Resistors use R (10**0), k, M, G, T: 4700 -> "4k7", 0.47 -> "R47", 47 -> "47R", 0 -> "0R".
    Capacitors use p, n, u, m: 2.2e-9 -> "2n2", 1e-7 -> "100n", 4.7e-13 -> "p47". Whole mantissas
    put the letter last ("10k"). ``value`` is rounded to ``digits`` significant figures first, so
    three-figure values (E192) round-trip exactly through ``parse_value``.

    Raises ValueError for a negative, non-finite or out-of-range value (resistors: below 1000 T;
    capacitors: above 0 and below 1000 m) or an unknown ``kind``.
    """
    if kind not in _CODE_LETTERS:
        raise ValueError(f"kind {kind!r}: must be one of {', '.join(map(repr, _CODE_LETTERS))}")
    letters = _CODE_LETTERS[kind]
    magnitude = _rounded(value, digits)
    if magnitude < 0:
        raise ValueError(f"value {value!r}: codes have no sign")
    if magnitude == 0:
        if kind == "capacitor":
            raise ValueError(f"value {value!r}: a capacitor code needs a positive value")
        return "0R"
    power = _engineering_power(magnitude, sorted(letters))
    mantissa = magnitude.scaleb(-power)
    if mantissa >= 1000:
        raise ValueError(f"value {value!r}: too large for a {kind} code")
    whole, _, fraction = _plain(mantissa).partition(".")
    return f"{'' if whole == '0' else whole}{letters[power]}{fraction}"
