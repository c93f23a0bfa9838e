"""The text style of every human report: "N %" with a space, ranges "2.38-2.62 kHz" in the
unit of the larger end, lines within 100 columns (common practice for terminals and
e-mail; the issue asks for 100)."""

from __future__ import annotations

from tristock.report.text import pct, value_range, wrap_all, wrap_items


def test_percent_has_a_space_and_an_optional_sign() -> None:
    assert pct(0.98) == "98.0 %"
    assert pct(0.0002, 2, sign=True) == "+0.02 %"
    assert pct(-0.0001, 2, sign=True) == "-0.01 %"


def test_a_range_takes_the_prefix_and_decimals_of_its_larger_end() -> None:
    assert value_range(2382.0, 2616.0, "Hz") == "2.38-2.62 kHz"
    assert value_range(2369.68, 2634.0, "Hz", 4) == "2.370-2.634 kHz"
    assert value_range(62.0, 5681.0, "Hz", 4) == "0.062-5.681 kHz"
    assert value_range(5.543, 6.469, "V", 4) == "5.543-6.469 V"


def test_wrapping_keeps_indents_and_breaks_lists_between_items() -> None:
    long = "  - " + " ".join(["word"] * 40)
    lines = wrap_all([long, "a\nb"])
    assert all(len(x) <= 100 for x in lines)
    assert lines[0].startswith("  - ") and lines[1].startswith("    word")
    assert lines[-2:] == ["a", "b"]
    items = [f"item {n}: " + "x" * 30 for n in range(6)]
    got = wrap_items("legend:", items)
    assert all(len(x) <= 100 for x in got)
    assert " ".join(got).replace("  ", " ").count("item") == 6
    assert all(x.rstrip().endswith(";") for x in got[:-1])  # every break is between items
