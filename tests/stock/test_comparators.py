"""comparators.csv (the comparator-IC Schmitt stage) and the op amps' optional input
common-mode columns: loading, validation messages at file:line, an absent table."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tristock.stock.catalog import CatalogError, load_catalog, read_table
from tristock.stock.comparators import Comparator, edge_start_s, full_edge_s

REPO = Path(__file__).resolve().parents[2]
SMALL = Path(__file__).resolve().parents[1] / "fixtures" / "small_catalog"
HEADER = (
    "id,channels,output,supply_min_v,supply_max_v,delay_s,rise_s,fall_s,vol_v,voh_headroom_v,"
    "offset_v,bias_a,output_a,input_cm_neg_v,input_cm_pos_headroom_v,unit_cost,stock"
)
GOOD_PUSH_PULL = "GC-T1,2,push-pull,2.7,5.5,40n,4n,4n,0.15,0.15,2m,1p,20m,-0.2,,0.95,10"
GOOD_OPEN_DRAIN = "GC-T2,2,Open-Drain,2,36,400n,200n,60n,0.25,,2m,25n,6m,-0.3,1.5,0.14,5"


def _issues(text: str) -> list[str]:
    with pytest.raises(CatalogError) as caught:
        read_table("comparators", text, "comparators.csv")
    return [str(issue) for issue in caught.value.errors]


def test_rows_load_into_comparators() -> None:
    parts = read_table("comparators", "\n".join([HEADER, GOOD_PUSH_PULL, GOOD_OPEN_DRAIN]))
    push, open_drain = parts
    assert isinstance(push, Comparator) and isinstance(open_drain, Comparator)
    assert push.output == "push-pull" and push.voh_headroom_v == 0.15
    assert push.input_cm_neg_v == -0.2 and push.input_cm_pos_headroom_v is None
    assert open_drain.is_open_drain and open_drain.voh_headroom_v is None
    assert open_drain.delay_s == pytest.approx(400e-9) and open_drain.output_a == 6e-3


def test_every_bad_cell_is_reported_at_its_line_and_column() -> None:
    rows = [
        HEADER,
        "GC-B1,2,totem,2.7,5.5,40n,4n,4n,0.15,0.15,2m,1p,20m,,,0.95,10",
        "GC-B2,2,push-pull,5.5,2.7,40n,0,4n,0.15,,2m,1p,20m,,,0.95,10",
        "GC-B3,2,open-drain,2,36,400n,200n,60n,0.25,0.3,2m,25n,6m,,,0.14,5",
        "GC-B4,2,push-pull,2.7,5.5,1n,4n,4n,0.15,0.15,2m,1p,-1,,,0.95,10",
    ]
    assert _issues("\n".join(rows)) == [
        "comparators.csv:2: output: must be push-pull or open-drain, got 'totem'",
        "comparators.csv:3: supply_min_v: must be less than supply_max_v (5.5 >= 2.7)",
        "comparators.csv:3: rise_s: must be > 0, got 0",
        "comparators.csv:3: voh_headroom_v: is required for a push-pull output",
        "comparators.csv:4: voh_headroom_v: must be blank for an open-drain output "
        "(R5 pulls it up)",
        "comparators.csv:5: delay_s: 1e-09 s is less than half the whole rise edge "
        "(4e-09 s 10-90 % is 5e-09 s 0-100 %): a linear edge would start before the "
        "threshold crossing",
        "comparators.csv:5: output_a: must be > 0, got -1",
    ]


def test_the_linear_edge_reaches_half_way_at_the_delay() -> None:
    # a linear 10-90 % time of 0.8·t spans 0-100 % in t (geometry of a ramp)
    assert full_edge_s(8e-9) == pytest.approx(10e-9)
    assert edge_start_s(8e-9, 8e-9) == pytest.approx(3e-9)


def test_the_table_is_optional_and_its_ids_are_unique(tmp_path: Path) -> None:
    small = tmp_path / "small"
    shutil.copytree(SMALL, small)
    assert load_catalog(small).comparators == ()
    first_opamp = load_catalog(small).opamps[0].id
    (small / "comparators.csv").write_text(
        "\n".join([HEADER, GOOD_PUSH_PULL, GOOD_PUSH_PULL.replace("GC-T1", first_opamp)]) + "\n"
    )
    with pytest.raises(CatalogError) as caught:
        load_catalog(small)
    (issue,) = caught.value.errors
    assert issue.line == 3 and issue.column == "id" and first_opamp in issue.message
    (small / "comparators.csv").write_text("\n".join([HEADER, GOOD_PUSH_PULL]) + "\n")
    catalog = load_catalog(small)
    assert catalog.kind_of("GC-T1") == "comparators"
    assert isinstance(catalog.get("GC-T1"), Comparator)


def test_opamp_common_mode_columns_are_optional_and_checked() -> None:
    header = (
        "id,channels,supply_min_v,supply_max_v,swing_pos_v,swing_neg_v,slew_v_per_us,gbw_hz,"
        "delay_s,offset_v,bias_a,output_a,input_cm_neg_v,input_cm_pos_headroom_v,unit_cost,stock"
    )
    text = "\n".join(
        [
            header,
            "OA-1,2,7,36,1.5,1.5,13,3e6,1.2e-6,3e-3,3e-11,0.02,3.5,0.5,0.24,3",
            "OA-2,2,7,36,1.5,1.5,13,3e6,1.2e-6,3e-3,3e-11,0.02,,,0.24,3",
            "OA-3,2,7,36,1.5,1.5,13,3e6,1.2e-6,3e-3,3e-11,0.02,x,,0.24,3",
        ]
    )
    with pytest.raises(CatalogError) as caught:
        read_table("opamps", text, "opamps.csv")
    (issue,) = caught.value.errors
    assert (issue.line, issue.column) == (4, "input_cm_neg_v")
    first, second = read_table("opamps", "\n".join(text.splitlines()[:3]))
    assert (first.input_cm_neg_v, first.input_cm_pos_headroom_v) == (3.5, 0.5)  # type: ignore[union-attr]
    assert (second.input_cm_neg_v, second.input_cm_pos_headroom_v) == (None, None)  # type: ignore[union-attr]


def test_demo_comparators_cover_the_classes() -> None:
    catalog = load_catalog(REPO / "catalogs" / "demo")
    comps = catalog.comparators
    push = [c for c in comps if c.output == "push-pull"]
    assert any(c.channels == 1 and c.delay_s <= 50e-9 for c in push)  # fast single
    assert any(c.channels == 2 and c.delay_s <= 50e-9 for c in push)  # fast dual
    assert any(c.is_open_drain and c.channels == 2 for c in comps)
    assert any(c.output_a <= 5e-3 and c.delay_s >= 1e-6 for c in comps)  # micropower
    assert all(c.id.startswith("GC-") for c in comps)
    assert all(o.input_cm_neg_v is not None for o in catalog.opamps)
    first = (REPO / "catalogs" / "demo" / "comparators.csv").read_text().splitlines()[0]
    assert first.startswith("# Fennmoor Instruments")
