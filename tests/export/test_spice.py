"""``tristock export spice``: the exported netlist runs in ngspice and agrees with the model
to the topology's ``spice_accuracy`` (0.3 %; the reference: ngspice transient runs); the
header says what the models leave out; a tuned design is exported at a chosen range and dial
position as the real divider, and agrees with the model there too."""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest

from ngspice_harness import require_ngspice, run_ngspice
from tristock.analysis.worstcase import worst_case
from tristock.circuits.board import rails_from_supply
from tristock.cli import main
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.export.corners import corner_oscillator
from tristock.export.designfile import parse_design
from tristock.export.spice import spice_netlist, tuned_at
from tristock.spec.loading import read_mapping
from tristock.stock.catalog import load_catalog

DEMO = demo_catalog_dir()
#: Rank 1 of the demo example (``OPAMP_SCHMITT.demo_board``) and of the trimmed example.
RANK1 = {"U1": "GA-JF2", "R1": "R0B-21K5", "R2": "R1F-78K7", "R3": "R1F-158K", "C1": "CPPG-2N20"}


def tristock(*argv: str | Path) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def write(path: Path, data: dict) -> Path:
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def model(data: dict) -> tuple[float, float, float]:
    spec, design = parse_design(data, load_catalog(DEMO))
    p = design.oscillator(rails_from_supply(spec.supply)).prediction()
    return float(p.frequency_hz), float(p.amplitude_vpp), float(p.duty_high)


def exported_and_run(tmp_path: Path, data: dict) -> dict[str, float]:
    cir = tmp_path / "osc.cir"
    code, out, err = tristock(
        "export", "spice", write(tmp_path / "d.json", data), "--catalog", DEMO, "-o", cir
    )
    assert code == 0 and out == "", err
    return run_ngspice(cir.read_text(encoding="utf-8"), timeout_s=180.0)


@pytest.mark.ngspice
def test_demo_rank1_netlist_agrees_with_the_model_in_ngspice(tmp_path: Path) -> None:
    require_ngspice()
    data = {"spec": read_mapping(example_spec_path("demo")), "parts": RANK1}
    meas = exported_and_run(tmp_path, data)
    f, vpp, duty = model(data)
    # source: ngspice (transient run of the exported netlist); 0.3 % is the topology's bound
    assert meas["freq"] / f - 1 == pytest.approx(0, abs=3e-3)
    assert meas["vtpp"] / vpp - 1 == pytest.approx(0, abs=3e-3)
    assert meas["duty"] == pytest.approx(duty, abs=3e-3)


@pytest.mark.ngspice
def test_the_fmin_corner_is_the_worst_case_bound_and_agrees_in_ngspice(tmp_path: Path) -> None:
    require_ngspice()
    data = {"spec": read_mapping(example_spec_path("demo")), "parts": RANK1}
    spec, design = parse_design(data, load_catalog(DEMO))
    low_f = worst_case(design, spec).frequency_hz[0]
    cir = tmp_path / "fmin.cir"
    path = write(tmp_path / "d.json", data)
    code, _, err = tristock(
        "export", "spice", path, "--catalog", DEMO, "--corner", "fmin", "-o", cir
    )
    assert code == 0, err
    text = cir.read_text(encoding="utf-8")
    assert "worst-case corner fmin" in text
    osc, _ = corner_oscillator(design, spec, "fmin")
    assert float(osc.prediction().frequency_hz) == pytest.approx(low_f, rel=1e-12)
    nominal_f, _, _ = model(data)
    assert low_f < nominal_f * 0.97  # the corner is well away from nominal
    meas = run_ngspice(text, timeout_s=180.0)
    # source: ngspice (transient run of the exported netlist)
    assert meas["freq"] / low_f - 1 == pytest.approx(0, abs=3e-3)
    assert meas["vtpp"] / float(osc.prediction().amplitude_vpp) - 1 == pytest.approx(0, abs=3e-3)


@pytest.mark.ngspice
def test_a_trimmed_design_is_exported_at_its_wiper(tmp_path: Path) -> None:
    require_ngspice()
    code, out, err = tristock("design", "--example", "trimmed", "--top", "1", "--json")
    assert code == 0, err
    data = json.loads(out)["candidates"][0]["design_file"]
    data["wiper"] = 0.7  # away from the nominal trim point: the pot's share must count
    meas = exported_and_run(tmp_path, data)
    f, vpp, _ = model(data)
    nominal_f, _, _ = model({**data, "wiper": 0.0})
    assert abs(f / nominal_f - 1) > 0.01  # the wiper moves the frequency measurably
    # source: ngspice (transient run of the exported netlist)
    assert meas["freq"] / f - 1 == pytest.approx(0, abs=3e-3)
    assert meas["vtpp"] / vpp - 1 == pytest.approx(0, abs=3e-3)


def test_header_says_what_is_left_out_and_measures_are_named(tmp_path: Path) -> None:
    data = {"spec": read_mapping(example_spec_path("demo")), "parts": RANK1}
    code, out, err = tristock(
        "export", "spice", write(tmp_path / "d.json", data), "--catalog", DEMO
    )
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("* tristock export spice of d.json")
    assert any("leave out" in line for line in lines[:12])
    for name in ("per", "freq", "duty", "vtmax", "vtmin", "vtpp"):
        assert any(line.startswith(f".meas tran {name} ") for line in lines), name
    assert lines[-1] == ".end"


#: Rank 1 of the bundled tuned example (divider control, two ranges).
TUNED_RANK1 = {"U1": "GA-JF2", "R1": "R5J-2K40", "R2": "R1F-8K87", "R3": "R1F-976K",
               "R4": "R5J-1K00", "RV1": "VP-100K", "C1": "CC0-1N50", "C2": "CC0-150P"}  # fmt: skip


def tuned_data() -> dict:
    return {"spec": read_mapping(example_spec_path("tuned")), "parts": TUNED_RANK1}


@pytest.mark.ngspice
@pytest.mark.parametrize(("range_number", "dial"), [(2, 0.25), (1, None)])
def test_a_tuned_design_is_exported_at_its_range_and_dial(
    tmp_path: Path, range_number: int, dial: float | None
) -> None:
    """The real divider (track halves, end stop R4, R3 from the wiper, the range capacitor)
    in ngspice against the model's Thévenin equivalent (R3 + R_th, C/β) at that setting;
    range 1 at the default dial 0.5 runs at about 50 Hz (the step scaled to the period)."""
    require_ngspice()
    cir = tmp_path / "tuned.cir"
    argv = ["--range", str(range_number)] + (["--dial", str(dial)] if dial is not None else [])
    path = write(tmp_path / "tuned.json", tuned_data())
    code, out, err = tristock("export", "spice", path, "--catalog", DEMO, *argv, "-o", cir)
    assert code == 0 and out == "", err
    text = cir.read_text(encoding="utf-8")
    assert f"* range {range_number} of 2" in text and "RVT vs w" in text and "R4 e ref" in text
    spec, design = parse_design(tuned_data(), load_catalog(DEMO))
    board = tuned_at(design, range_number, 0.5 if dial is None else dial)
    p = board.oscillator(rails_from_supply(spec.supply)).prediction()
    meas = run_ngspice(text, timeout_s=300.0)
    # source: ngspice (transient run of the exported netlist of the real divider); 0.3 %
    assert meas["freq"] / float(p.frequency_hz) - 1 == pytest.approx(0, abs=3e-3)
    assert meas["vtpp"] / float(p.amplitude_vpp) - 1 == pytest.approx(0, abs=3e-3)


def test_the_dial_moves_the_exported_tuned_board() -> None:
    """Dial 0 and dial 1 of range 2 are the range's two ends: the model's frequencies differ
    several times over, and each netlist carries its own track halves."""
    spec, design = parse_design(tuned_data(), load_catalog(DEMO))
    rails = rails_from_supply(spec.supply)
    f = [float(tuned_at(design, 2, a).oscillator(rails).prediction().frequency_hz) for a in (0, 1)]
    assert max(f) / min(f) > 5
    low, high = (spice_netlist(spec, tuned_at(design, 2, a)) for a in (0.0, 1.0))
    assert "VVB w e 0" in low and "RVT vs w 100000.0" in low  # wiper at the bottom
    assert "VVT vs w 0" in high and "RVB w e 100000.0" in high  # wiper at the top


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        (["--range", "3"], "range: this design has ranges 1..2"),
        (["--corner", "fmin"], "corner: a tuned design is exported at nominal values"),
    ],
)
def test_tuned_export_mistakes_are_one_line(tmp_path: Path, argv: list[str], words: str) -> None:
    path = write(tmp_path / "tuned.json", tuned_data())
    code, out, err = tristock("export", "spice", path, "--catalog", DEMO, *argv)
    assert code == 2 and out == ""
    assert words in err and "tuned.json" in err and len(err.strip().splitlines()) == 1


def test_range_and_dial_are_refused_for_a_fixed_design(tmp_path: Path) -> None:
    data = {"spec": read_mapping(example_spec_path("demo")), "parts": RANK1}
    path = write(tmp_path / "d.json", data)
    code, out, err = tristock("export", "spice", path, "--catalog", DEMO, "--dial", "0.3")
    assert code == 2 and out == "" and "no [tuning]" in err
