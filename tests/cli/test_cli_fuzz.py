"""A bounded fuzz of the ``tristock`` command: random and broken specs, options, catalogs and
DESIGN files. Whatever the input, the command ends with a documented exit code (0, 1, 2, 3),
never a traceback nor a crash log; a bad input is one line; ``--json`` output is strict JSON.

Most runs are in-process (``main(argv)`` with stdout and stderr captured); a few are real
processes. The examples are bounded so the module runs in well under a minute.
"""

from __future__ import annotations

import json
import math
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from cli_helpers import (
    DEMO_CATALOG,
    SMALL_CATALOG,
    SMALL_SPEC,
    assert_clean,
    demo_parts,
    demo_spec_data,
    run,
    run_process,
)
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

FUZZ = settings(
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)

#: Values a careless or hostile spec author might write anywhere.
ODD_VALUES = st.one_of(
    st.booleans(),
    st.none(),
    st.text(max_size=6),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([5e-324, 1e-320, 1e-9, 1e-3, 0.01, 0.0, -0.0, 1e308, 10**30, "auto", "E24"]),
    st.lists(st.integers(0, 3), max_size=2),
    st.dictionaries(st.sampled_from(["a", "id", "low_hz"]), st.integers(0, 9), max_size=2),
)
DELETE = object()


@pytest.fixture(scope="module", autouse=True)
def _isolated() -> Iterator[None]:
    """Crash logs and relative plot names go to temporary folders, checked afterwards."""
    with (
        tempfile.TemporaryDirectory() as state,
        tempfile.TemporaryDirectory() as cwd,
        pytest.MonkeyPatch.context() as mp,
    ):
        mp.setenv("XDG_STATE_HOME", state)
        mp.chdir(cwd)
        yield
        assert not list(Path(state).rglob("crash-*.log")), "a crash log was written"


@pytest.fixture(scope="module")
def work() -> Iterator[Path]:
    with tempfile.TemporaryDirectory() as folder:
        yield Path(folder)


def leaf_paths(data: dict[str, Any], prefix: tuple[str, ...] = ()) -> list[tuple[str, ...]]:
    out: list[tuple[str, ...]] = []
    for key, value in data.items():
        out.append((*prefix, key))
        if isinstance(value, dict):
            out += leaf_paths(value, (*prefix, key))
    return out


EXTRA_PATHS = [
    ("trim",),
    ("trim", "margin_pct"),
    ("trim", "drift_after_trim_pct"),
    ("tuning",),
    ("tuning", "ranges"),
    ("limits", "max_cost"),
    ("limits", "min_yield"),
    ("limits", "guarantee"),
    ("supply", "reference_v"),
    ("unknown",),
]


def mutate(base: dict[str, Any], path: tuple[str, ...], value: Any) -> dict[str, Any]:
    data = json.loads(json.dumps(base))
    node = data
    for key in path[:-1]:
        child = node.get(key)
        if not isinstance(child, dict):
            child = {}
            node[key] = child
        node = child
    if value is DELETE:
        node.pop(path[-1], None)
    else:
        node[path[-1]] = value
    return data


@st.composite
def broken_specs(draw: st.DrawFn) -> dict[str, Any]:
    base = SMALL_SPEC
    paths = leaf_paths(base) + EXTRA_PATHS
    data = base
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from(paths))
        value = draw(st.one_of(ODD_VALUES, st.just(DELETE)))
        data = mutate(data, path, value)
    return data


@given(spec=broken_specs(), engine=st.sampled_from(["cpsat", "enumerate"]))
@settings(FUZZ, max_examples=60)
def test_fuzz_specs(work: Path, spec: dict[str, Any], engine: str) -> None:
    path = work / "spec.json"
    path.write_text(json.dumps(spec, allow_nan=True), encoding="utf-8")
    r = run(
        "design", path, "--catalog", SMALL_CATALOG, "--engine", engine, "--time-limit", "2",
        "--json",
    )  # fmt: skip
    assert_clean(r)
    event(f"exit {r.code}")


def log_uniform(least: float, most: float) -> st.SearchStrategy[float]:
    """Both ends, and values spread evenly in log between them."""
    inside = st.floats(math.log10(least), math.log10(most)).map(lambda x: 10**x)
    return st.one_of(st.sampled_from([least, most]), inside.map(lambda v: min(max(v, least), most)))


@st.composite
def extreme_specs(draw: st.DrawFn) -> dict[str, Any]:
    """Valid specs with every value anywhere in its range, the edges most of all."""
    positive = draw(log_uniform(0.1, 60.0))
    negative = draw(st.one_of(st.just(0.0), log_uniform(0.1, 60.0).map(lambda v: -v)))
    span = positive - negative
    spec: dict[str, Any] = {
        "supply": {
            "positive_v": positive,
            "negative_v": negative,
            "tolerance_pct": draw(st.sampled_from([0.0, 1e-9, 5.0, 20.0])),
        },
        "frequency": {
            "target_hz": draw(log_uniform(1e-3, 1e7)),
            "tolerance_pct": draw(log_uniform(0.01, 50.0)),
        },
        "triangle": {
            "amplitude_vpp": draw(log_uniform(1e-3, max(1e-3, 0.999 * span))),
            "tolerance_pct": draw(log_uniform(0.01, 50.0)),
        },
        "environment": {
            "temp_min_c": draw(st.sampled_from([-60.0, 0.0, 25.0])),
            "temp_max_c": draw(st.sampled_from([25.0, 85.0, 200.0])),
        },
        "build": {"boards": draw(st.sampled_from([1, 2, 100, 5000, 10_000_000]))},
        "limits": {
            "guarantee": draw(st.sampled_from(["nominal", "worst_case", "yield"])),
            "min_yield": draw(st.sampled_from([1e-300, 0.5, 0.99, 1.0])),
            "resistance_min_ohm": draw(st.sampled_from([1e-300, 1.0, 1000.0])),
            "resistance_max_ohm": draw(st.sampled_from([1e6, 1e12, 1e300])),
        },
        "ranking": {
            "by": draw(st.sampled_from(["balanced", "frequency_error", "cost", "yield"])),
            "top": draw(st.integers(1, 3)),
        },
    }
    if draw(st.booleans()):
        spec["limits"]["max_cost"] = draw(log_uniform(1e-4, 1e6))
    if negative == 0 and draw(st.booleans()):
        spec["supply"]["reference_v"] = positive * draw(st.sampled_from([1e-9, 0.5, 0.999999]))
    kind = draw(st.sampled_from(["fixed", "fixed", "fixed", "trim", "tuning"]))
    if kind == "trim":
        spec["trim"] = {"margin_pct": draw(st.sampled_from([0.0, 10.0, 49.9]))}
        drift = draw(st.sampled_from([None, 0.01, 50.0]))
        if drift is not None:
            spec["trim"]["drift_after_trim_pct"] = drift
    elif kind == "tuning":
        low = draw(log_uniform(1e-3, 1e6))
        spec["tuning"] = {
            "low_hz": low,
            "high_hz": min(1e7, low * draw(log_uniform(1.01, 1e6))),
            "control": draw(st.sampled_from(["series", "divider"])),
            "ranges": draw(st.sampled_from(["auto", 1, 8])),
            "overlap_pct": draw(st.sampled_from([0.0, 5.0, 50.0])),
        }
        del spec["frequency"]
    return spec


@st.composite
def near_specs(draw: st.DrawFn) -> dict[str, Any]:
    """Valid specs near one the small catalog meets, so that most searches find designs."""
    spec = json.loads(json.dumps(SMALL_SPEC))
    spec["supply"]["positive_v"] = draw(st.sampled_from([10.0, 12.0, 15.0]))
    spec["supply"]["tolerance_pct"] = draw(st.sampled_from([0.0, 5.0]))
    spec["frequency"]["target_hz"] = draw(st.floats(12e3, 30e3))
    spec["frequency"]["tolerance_pct"] = draw(st.sampled_from([2.0, 5.0, 20.0]))
    spec["triangle"]["amplitude_vpp"] = draw(st.floats(2.0, 8.0))
    spec["limits"] = {"guarantee": draw(st.sampled_from(["nominal", "worst_case", "yield"]))}
    spec["ranking"] = {
        "by": draw(st.sampled_from(["balanced", "frequency_error", "cost", "yield"])),
        "top": draw(st.integers(1, 3)),
    }
    if draw(st.integers(0, 3)) == 0:
        spec["trim"] = {"margin_pct": draw(st.sampled_from([0.0, 10.0, 30.0]))}
    return spec


@given(
    spec=st.one_of(extreme_specs(), near_specs()),
    catalog=st.sampled_from([SMALL_CATALOG, DEMO_CATALOG]),
    engine=st.sampled_from(["cpsat", "enumerate"]),
)
@settings(FUZZ, max_examples=40)
def test_fuzz_valid_extreme_specs(
    work: Path, spec: dict[str, Any], catalog: Path, engine: str
) -> None:
    path = work / "extreme.json"
    path.write_text(json.dumps(spec), encoding="utf-8")
    r = run("design", path, "--catalog", catalog, "--engine", engine, "--time-limit", "1")
    assert_clean(r, {0, 1, 3})
    event(f"exit {r.code}")


@given(
    spec=extreme_specs(),
    command=st.sampled_from(["analyse", "simulate", "reoptimise"]),
)
@settings(FUZZ, max_examples=40)
def test_fuzz_demo_design_under_extreme_specs(
    work: Path, spec: dict[str, Any], command: str
) -> None:
    path = work / "extreme_design.json"
    path.write_text(json.dumps({"spec": spec, "parts": demo_parts()}), encoding="utf-8")
    extra = {"analyse": ["--samples", "300"], "simulate": ["--periods", "2"]}.get(
        command, ["--time-limit", "1"]
    )
    r = run(command, path, "--catalog", DEMO_CATALOG, "--json", *extra)
    assert_clean(r)
    event(f"exit {r.code}")


@given(raw=st.binary(max_size=300), suffix=st.sampled_from([".toml", ".json", ""]))
@settings(FUZZ, max_examples=40)
def test_fuzz_spec_bytes(work: Path, raw: bytes, suffix: str) -> None:
    path = work / f"raw{suffix}"
    path.write_bytes(raw)
    r = run("design", path, "--catalog", SMALL_CATALOG)
    assert_clean(r, {2})


@given(text=st.text(alphabet="[]{}=\"',:.0123456789abn \n#", max_size=200))
@settings(FUZZ, max_examples=40)
def test_fuzz_spec_text(work: Path, text: str) -> None:
    for suffix in (".toml", ".json"):
        path = work / f"text{suffix}"
        path.write_text(text, encoding="utf-8")
        assert_clean(run("design", path, "--catalog", SMALL_CATALOG), {2})


# ---- options ----------------------------------------------------------------------------

ARG_VALUES = st.sampled_from(
    ["0", "-1", "1", "2", "7", "101", "nan", "inf", "-inf", "1e9", "abc", "", " 3", "0.5",
     "1_0", "4294967296", "100000001", "3601", "x.png", "out.jpg", "/no/dir/p.svg", "E24",
     "demo", "yield", "cost", "--json", "-h"]
)  # fmt: skip

OPTIONS = {
    "design": ["--top", "--time-limit", "--by", "--engine", "--plot", "--example"],
    "analyse": ["--samples", "--seed", "--distribution"],
    "simulate": ["--periods", "--max-points", "--plot"],
    "reoptimise": ["--without", "--boards", "--top", "--time-limit"],
}


@st.composite
def command_lines(draw: st.DrawFn, design_file: Path) -> list[str]:
    command = draw(st.sampled_from(sorted(OPTIONS)))
    argv = [command]
    if command == "design":
        argv += draw(st.sampled_from([["--example"], [str(design_file)], []]))
        argv += ["--catalog", str(SMALL_CATALOG if "--example" not in argv else DEMO_CATALOG)]
    else:
        argv += [str(design_file), "--catalog", str(DEMO_CATALOG)]
    for _ in range(draw(st.integers(0, 3))):
        argv += [draw(st.sampled_from(OPTIONS[command])), draw(ARG_VALUES)]
    if command == "analyse":
        argv += ["--samples", "300"]  # the last value wins: keeps the run short
    if command in ("design", "reoptimise"):
        argv += ["--time-limit", "2"]
    return argv


@pytest.fixture(scope="module")
def design_file(work: Path) -> Path:
    path = work / "design.json"
    path.write_text(json.dumps({"spec": demo_spec_data(), "parts": demo_parts()}), "utf-8")
    return path


@given(data=st.data())
@settings(FUZZ, max_examples=50)
def test_fuzz_options(design_file: Path, work: Path, data: st.DataObject) -> None:
    argv = data.draw(command_lines(design_file))
    r = run(*argv)
    assert_clean(r)
    event(f"exit {r.code}")
    for name in ("x.png", "out.jpg"):  # a plot is written only where asked, never half
        leftovers = list(Path.cwd().glob(f".{name}.*"))
        assert not leftovers, leftovers


@given(
    count=st.sampled_from(["-1", "0", "5", "1e3", "abc", "1000000000", "1000000001"]),
    part=st.sampled_from(["TR-1K00", "NOPE", "", "TC-1N00"]),
)
@settings(FUZZ, max_examples=15)
def test_fuzz_set_stock(work: Path, count: str, part: str) -> None:
    folder = work / "stock"
    if not folder.exists():
        shutil.copytree(SMALL_CATALOG, folder)
    r = run("catalog", "set-stock", folder, part, count)
    assert_clean(r)
    event(f"exit {r.code}")
    assert_clean(run("catalog", "check", folder), {0})


@given(
    kind=st.sampled_from(["resistor", "capacitor"]),
    low=st.sampled_from(["10", "4k7", "1e-300", "0", "-1", "nan", "1M", "x"]),
    high=st.sampled_from(["1M", "10", "1e300", "inf", "2u"]),
    tolerance=st.sampled_from(["1", "0", "-5", "nan", "60"]),
    extra=st.sampled_from([[], ["--dielectric", "C0G", "--tempco", "30"], ["--series", "E7"]]),
)
@settings(FUZZ, max_examples=30)
def test_fuzz_catalog_generate(
    kind: str, low: str, high: str, tolerance: str, extra: list[str]
) -> None:
    argv = ["catalog", "generate", "--kind", kind, "--series", "E12", "--from", low, "--to", high]
    r = run(*argv, "--tolerance", tolerance, *extra)
    assert_clean(r)
    event(f"exit {r.code}")


# ---- catalogs ---------------------------------------------------------------------------

CELLS = st.sampled_from(
    ["", "0", "-1", "nan", "inf", "1e400", "true", "4k7", "x", '"', "1,2", "\x00", "9" * 30]
)


@st.composite
def catalog_edits(draw: st.DrawFn) -> list[tuple[str, str, Any]]:
    files = ["resistors.csv", "capacitors.csv", "opamps.csv", "pots.csv"]
    edits = []
    for _ in range(draw(st.integers(1, 3))):
        name = draw(st.sampled_from(files))
        kind = draw(st.sampled_from(["cell", "zero_stock", "truncate", "bytes", "delete"]))
        arg: Any = None
        if kind == "cell":
            arg = (draw(st.integers(0, 12)), draw(st.integers(0, 13)), draw(CELLS))
        elif kind == "truncate":
            arg = draw(st.integers(0, 400))
        elif kind == "bytes":
            arg = draw(st.binary(min_size=1, max_size=40))
        edits.append((name, kind, arg))
    return edits


def apply_edit(folder: Path, name: str, kind: str, arg: Any) -> None:
    path = folder / name
    if not path.exists():
        return
    if kind == "delete":
        path.unlink()
    elif kind == "truncate":
        path.write_bytes(path.read_bytes()[:arg])
    elif kind == "bytes":
        path.write_bytes(path.read_bytes() + arg)
    else:
        lines = path.read_text(encoding="utf-8", errors="replace").splitlines()
        rows = [i for i, line in enumerate(lines) if line and not line.startswith("#")]
        if kind == "zero_stock":
            for i in rows[1:]:
                lines[i] = lines[i].rsplit(",", 1)[0] + ",0"
        elif rows:
            row, column, text = arg
            i = rows[row % len(rows)]
            cells = lines[i].split(",")
            cells[column % len(cells)] = text
            lines[i] = ",".join(cells)
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")


@given(edits=catalog_edits())
@settings(FUZZ, max_examples=40)
def test_fuzz_catalogs(work: Path, edits: list[tuple[str, str, Any]]) -> None:
    folder = work / "catalog"
    shutil.rmtree(folder, ignore_errors=True)
    shutil.copytree(SMALL_CATALOG, folder)
    for edit in edits:
        apply_edit(folder, *edit)
    assert_clean(run("catalog", "check", folder), {0, 1})
    spec = work / "small.json"
    spec.write_text(json.dumps(SMALL_SPEC), encoding="utf-8")
    r = run("design", spec, "--catalog", folder, "--top", "1", "--time-limit", "2")
    assert_clean(r)
    event(f"exit {r.code}")


# ---- DESIGN files -----------------------------------------------------------------------


@st.composite
def broken_designs(draw: st.DrawFn) -> dict[str, Any]:
    data: dict[str, Any] = {"spec": demo_spec_data(), "parts": dict(demo_parts())}
    for _ in range(draw(st.integers(1, 3))):
        where = draw(st.sampled_from(["part", "wiper", "range", "spec", "top"]))
        if where == "part":
            name = draw(st.sampled_from(["U1", "R1", "R2", "R3", "C1", "RV1", "C2", "X9"]))
            pool = [*demo_parts().values(), "NOPE", "TP-10K0"]
            value = draw(st.one_of(st.sampled_from(pool), ODD_VALUES, st.just(DELETE)))
            data["parts"] = mutate(data["parts"], (name,), value)
        elif where == "spec":
            path = draw(st.sampled_from(leaf_paths(data["spec"]) + EXTRA_PATHS))
            data["spec"] = mutate(data["spec"], path, draw(ODD_VALUES))
        else:
            data = mutate(data, (where,), draw(ODD_VALUES))
    return data


@given(design=broken_designs(), command=st.sampled_from(["analyse", "simulate", "reoptimise"]))
@settings(FUZZ, max_examples=40)
def test_fuzz_design_files(work: Path, design: dict[str, Any], command: str) -> None:
    path = work / "broken_design.json"
    path.write_text(json.dumps(design, allow_nan=True), encoding="utf-8")
    extra = {"analyse": ["--samples", "200"], "simulate": ["--periods", "2"]}.get(
        command, ["--time-limit", "2"]
    )
    r = run(command, path, "--catalog", DEMO_CATALOG, "--json", *extra)
    assert_clean(r)
    event(f"exit {r.code}")


# ---- a few real processes ---------------------------------------------------------------


@given(
    argv=st.sampled_from(
        [
            ["design", "--example", "--top", "0"],
            ["design", "--example", "--time-limit", "nan", "--json"],
            ["analyse", "missing.json", "--catalog", str(DEMO_CATALOG)],
            ["catalog", "check", str(SMALL_CATALOG.parent / "broken_catalog")],
            ["design", "--example", "--top", "1", "--json"],
        ]
    )
)
@settings(FUZZ, max_examples=5)
def test_fuzz_real_processes(argv: list[str]) -> None:
    assert_clean(run_process(*argv))
