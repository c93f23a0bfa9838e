"""Option value types for the parser: each reads one argument and checks its range.

A value out of range raises ``argparse.ArgumentTypeError``; the parser reports it as one line
naming the option ("argument --top: must be 1..100, got 0"). The ranges are
``tristock.spec.limits``, the same for every face.
"""

from __future__ import annotations

import argparse
import math
from collections.abc import Callable


def whole(least: int, most: int) -> Callable[[str], int]:
    """A whole number in ``least..most``."""

    def parse(text: str) -> int:
        try:
            value = int(text.strip(), 10)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
        if not least <= value <= most:
            raise argparse.ArgumentTypeError(f"must be {least}..{most}, got {value}")
        return value

    parse.__name__ = "whole number"  # argparse names the type in its own messages
    return parse


def finite(text: str) -> float:
    """A finite number (nan and inf refused)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number, got {text!r}")
    return value


def fraction(text: str) -> float:
    """A number in 0..1 (a wiper position)."""
    value = finite(text)
    if not 0.0 <= value <= 1.0:
        raise argparse.ArgumentTypeError(f"must be 0..1, got {text}")
    return value


def seconds(most: float) -> Callable[[str], float]:
    """A duration in seconds: finite, above zero, at most ``most``."""

    def parse(text: str) -> float:
        value = finite(text)
        if not 0 < value <= most:
            raise argparse.ArgumentTypeError(f"must be above 0 and at most {most:g} s, got {text}")
        return value

    parse.__name__ = "seconds"
    return parse


def text(what: str) -> Callable[[str], str]:
    """A non-empty argument without control characters (a stock code, a file name)."""

    def parse(value: str) -> str:
        if not value.strip():
            raise argparse.ArgumentTypeError(f"expected {what}, got an empty string")
        if any(ord(ch) < 32 for ch in value):
            raise argparse.ArgumentTypeError(f"{what} {value!r} holds control characters")
        return value

    parse.__name__ = what
    return parse
