"""The op-amp delay columns: delay_s (its meaning, stated by `catalog check`) or a datasheet's
delay to 50 % of the output swing, delay_to_mid_s, converted on load; never both."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tristock import cli
from tristock.stock.catalog import CatalogError, load_catalog, read_table
from tristock.stock.parts import DELAY_MEANING, OpAmp, delay_from_delay_to_mid

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"
COMMON = "id,channels,supply_min_v,supply_max_v,swing_pos_v,swing_neg_v,slew_v_per_us,gbw_hz"
TAIL = "offset_v,bias_a,output_a,unit_cost,stock"
#: 36 V span less 1.5 V headroom each side: a 33 V step; 13 V/µs
ROW = "UT-JF,2,7,36,1.5,1.5,13,3e6"
END = "3e-3,3e-11,0.02,0.24,10"


def _opamps(text: str) -> list[OpAmp]:
    return [p for p in read_table("opamps", text, "o.csv") if isinstance(p, OpAmp)]


def _errors(text: str) -> list[str]:
    with pytest.raises(CatalogError) as caught:
        read_table("opamps", text, "o.csv")
    return [str(e) for e in caught.value.errors]


def test_delay_to_mid_is_converted_at_the_full_output_step() -> None:
    # model's comparator (transport delay, then a linear slew; common practice): mid-swing is
    # reached td + step/(2·SR) after the crossing: 2.5 µs - 33 V/(2·13 V/µs) = 1.2308 µs
    (part,) = _opamps(f"{COMMON},delay_to_mid_s,{TAIL}\n{ROW},2.5u,{END}\n")
    assert part.delay_s == pytest.approx(2.5e-6 - 33.0 / (2 * 13e6), rel=1e-12)
    assert part.delay_s == pytest.approx(1.2308e-6, rel=1e-4)
    assert part.delay_to_mid_s == 2.5e-6
    assert part.full_step_v == 33.0
    assert delay_from_delay_to_mid(2.5e-6, 33.0, 13e6) == part.delay_s


def test_a_table_may_mix_the_two_columns_row_by_row() -> None:
    header = f"{COMMON},delay_s,delay_to_mid_s,{TAIL}"
    text = f"{header}\n{ROW},1.2u,,{END}\nUT-B,2,7,36,1.5,1.5,13,3e6,,2.5u,{END}\n"
    first, second = _opamps(text)
    assert (first.delay_s, first.delay_to_mid_s) == (1.2e-6, None)
    assert second.delay_s == pytest.approx(1.2308e-6, rel=1e-4)


def test_a_row_that_gives_both_is_refused() -> None:
    header = f"{COMMON},delay_s,delay_to_mid_s,{TAIL}"
    assert _errors(f"{header}\n{ROW},1.2u,2.5u,{END}\n") == [
        "o.csv:2: delay_to_mid_s: give delay_s or delay_to_mid_s, not both"
    ]


def test_a_row_that_gives_neither_is_refused() -> None:
    header = f"{COMMON},delay_s,delay_to_mid_s,{TAIL}"
    assert _errors(f"{header}\n{ROW},,,{END}\n") == [
        "o.csv:2: delay_s: is empty, and so is delay_to_mid_s: give one of them"
    ]


def test_a_delay_to_mid_shorter_than_the_half_slew_is_refused() -> None:
    # 33 V at 13 V/µs: half the step takes 1.269 µs, so 1 µs to mid-swing is impossible
    assert _errors(f"{COMMON},delay_to_mid_s,{TAIL}\n{ROW},1u,{END}\n") == [
        "o.csv:2: delay_to_mid_s: 1e-06 s is less than the 1.26923e-06 s the output takes to "
        "slew half its 33 V step at 13 V/µs"
    ]


def test_a_header_needs_one_of_the_delay_columns() -> None:
    assert _errors(f"{COMMON},{TAIL}\n") == [
        "o.csv:1: delay_s: required column is missing (or delay_to_mid_s)"
    ]


def test_catalog_check_states_what_delay_means(tmp_path: Path, capsys) -> None:
    target = tmp_path / "small"
    shutil.copytree(FIXTURES / "small_catalog", target)
    table = target / "opamps.csv"
    lines = table.read_text().splitlines()
    header_at = next(i for i, line in enumerate(lines) if line and not line.startswith("#"))
    at = lines[header_at].split(",").index("delay_s")
    lines[header_at] += ",delay_to_mid_s"
    for i in range(header_at + 1, len(lines)):
        if lines[i] and not lines[i].startswith("#"):
            lines[i] += ","
    first = lines[header_at + 1].split(",")
    first[at], first[-1] = "", "20u"  # the first part by its datasheet figure instead
    lines[header_at + 1] = ",".join(first)
    table.write_text("\n".join(lines) + "\n")
    part = load_catalog(target).opamps[0]
    assert part.delay_to_mid_s == 20e-6 and part.delay_s < 20e-6
    assert cli.main(["catalog", "check", str(target)]) == 0
    out = capsys.readouterr().out
    assert f"delay_s: {DELAY_MEANING}" in out
    assert "threshold crossing to the start of the output slew" in out
    assert (
        "delay_to_mid_s (a datasheet's delay to 50 % of the output swing) given for 1 part" in out
    )
    assert part.id in out
