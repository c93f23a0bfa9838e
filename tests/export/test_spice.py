"""``tristock export spice``: the exported netlist runs in ngspice and agrees with the model
to the topology's ``spice_accuracy`` (0.3 %; the reference: ngspice transient runs); the
header says what the models leave out; tuned designs are refused in one line."""

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


def test_tuned_designs_are_refused_in_one_line(tmp_path: Path) -> None:
    spec = read_mapping(example_spec_path("tuned"))
    panel = next(p.id for p in load_catalog(DEMO).pots if p.kind == "panel")
    parts = {**RANK1, "RV1": panel, "R4": "R1F-78K7"}
    path = write(tmp_path / "tuned.json", {"spec": spec, "parts": parts})
    code, out, err = tristock("export", "spice", path, "--catalog", DEMO)
    assert code == 2 and out == ""
    assert "spec.tuning" in err and "tuned.json" in err and len(err.strip().splitlines()) == 1
