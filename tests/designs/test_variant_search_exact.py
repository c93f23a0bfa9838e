"""The variants' searches against brute force over each circuit's FULL model.

Reference, written here and independent of the search forms, windows, bounds and pruning:
every board of a small catalog (U1 × the stage's own parts: a push-pull comparator U2, or an
open-drain one with each resistor as its pull-up R5; or a zener part for D1 = D2 and R5 from
the resistors, for the zener-clamped loop; × R1, R2, R3 × C1)
built as its topology's board and predicted by the topology's own model at nominal values,
25 °C and the nominal rails (``board.oscillator(...).prediction()``, itself checked against
ngspice in tests/circuits), accepted by the spec's rules as the README states them (bands;
the integrator error voltage inside the square levels; the triangle's peaks inside the
levels, an open-drain U2's inside U1's output swing; the integrator's slew at least each
ramp's slope; timing share within ``max_timing_share``; C1's rating over the largest peak
with the amplitude margin; stock for
every piece; cost; no check of error severity, the topology's own ``check``, which holds the
open-drain stiffness rule R5·(1/R3 + 1/R2) ≤ 0.1 as pull_up_load), then by the
worst case over the spread box (``analysis.worst_case``)
under that guarantee, and ranked by the documented score (README, "Ranking": the stage's cost
and lines as one term, each resistor and capacitor its own, a shared stock code credited
once per line saved). ``topology = "any"`` must give the merge of the circuits' answers.
"""

from __future__ import annotations

import dataclasses
import itertools
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from tristock.analysis.worstcase import worst_case
from tristock.circuits import TOPOLOGIES, spec_topologies
from tristock.circuits.board import AnyBoard, Design, board_from, rails_from_supply
from tristock.circuits.rails import OpAmpModel
from tristock.designs import design
from tristock.search.model import (
    BALANCED_WEIGHTS,
    COST_RESOLUTION,
    SearchModel,
    build_model,
    quantise,
)
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Resistor
from tristock.stock.tables import Catalog


def stages(name: str, catalog: Catalog) -> list[dict[str, Part]]:
    """Every stage a board of ``name`` can have from ``catalog`` (no eligibility applied): an
    open-drain U2 with every resistor as R5."""
    out: list[dict[str, Part]] = []
    for u1 in catalog.opamps:
        if name == "comparator_schmitt":
            for u2 in catalog.comparators:
                if u2.is_open_drain:
                    out += [{"U1": u1, "U2": u2, "R5": r5} for r5 in catalog.resistors]
                else:
                    out.append({"U1": u1, "U2": u2})
        if name == "clamped_schmitt":
            zeners = [d for d in catalog.diodes if d.is_zener]
            out += [
                {"U1": u1, "D1": z, "D2": z, "R5": r5}
                for z, r5 in itertools.product(zeners, catalog.resistors)
            ]
    return out


def board_of(name: str, parts: dict[str, Part]) -> AnyBoard:
    """The board of ``name`` built from its parts by designator (``Design`` for both loops)."""
    if name == "clamped_schmitt":
        return board_from(TOPOLOGIES[name], parts)
    named: dict[str, Any] = {k.lower(): p for k, p in parts.items()}
    return Design(**named, topology=TOPOLOGIES[name])


def accepted(spec: Spec, board: AnyBoard) -> tuple[float, float, float] | None:
    """(e_f, e_a, timing share) of a board the README's nominal rules accept, else None."""
    rails = rails_from_supply(spec.supply)
    try:
        p = board.oscillator(rails).prediction()
    except ValueError:  # cannot oscillate on these rails
        return None
    f, a = float(p.frequency_hz), float(p.amplitude_vpp)
    if not (np.isfinite(f) and np.isfinite(a)):
        return None
    parts = board.parts()
    u1, r3, c1 = parts["U1"], parts["R3"], parts["C1"]
    assert isinstance(u1, OpAmp) and isinstance(r3, Resistor) and isinstance(c1, Capacitor)
    m = OpAmpModel.from_part(u1)
    ref = rails.reference_v
    # the prediction's voltages are from the reference node (``physics``)
    vh, vl = float(p.square_high_v), -float(p.square_low_v)
    ve = m.offset_v + m.bias_a * r3.value_ohm
    rc = r3.value_ohm * c1.value_f
    top, bottom = float(p.peak_high_v), float(p.peak_low_v)
    tf, ta = spec.target.tolerance_pct / 100, spec.triangle.tolerance_pct / 100
    e_f = float(np.log(f / spec.target.target_hz))
    e_a = float(np.log(a / spec.triangle.amplitude_vpp))
    ok = np.log1p(-tf) <= e_f <= np.log1p(tf) and np.log1p(-ta) <= e_a <= np.log1p(ta)
    ok = ok and vh - ve > 0 and vl + ve > 0
    # the peaks inside the square levels, but for an open-drain U2, whose high level
    # follows the triangle: there U1's output swing bounds them (the model's ground)
    if "R5" in board.parts():
        swing = (rails.v_neg + u1.swing_neg_v - ref, rails.v_pos - u1.swing_pos_v - ref)
        ok = ok and swing[0] <= bottom and top <= swing[1]
    else:
        ok = ok and top < vh and bottom > -vl
    ok = ok and (vl + ve) <= m.slew_rise_v_per_s * rc and (vh - ve) <= m.slew_fall_v_per_s * rc
    ok = ok and float(p.timing_share) <= spec.limits.max_timing_share
    ok = ok and c1.voltage_v >= max(abs(top), abs(bottom)) * (1 + ta)
    ok = ok and not any(w.severity == "error" for w in board.topology.check(board, rails))
    return (e_f, e_a, float(p.timing_share)) if ok else None


def score_key(
    model: SearchModel, spec: Spec, board: AnyBoard, stage: dict[str, Part], e: tuple[float, ...]
) -> tuple[object, ...]:
    """The documented rank key, the stage's cost and BOM lines one term."""
    parts = board.parts()
    res = {p.id: n for n, p in enumerate(model.resistors.parts)}
    cap = {p.id: n for n, p in enumerate(model.capacitors.parts)}
    stage_board = {k: p for k, p in parts.items() if k in stage}
    u1 = stage_board["U1"]
    assert isinstance(u1, OpAmp)
    packages = 1 if "U2" in stage_board else u1.packages_per_board
    stage_cost = sum(p.unit_cost * (packages if k == "U1" else 1) for k, p in stage_board.items())
    stage_lines = len({p.id for p in stage_board.values()})
    scale = spec.limits.max_cost or 1.0
    if model.mode == "balanced":
        w = BALANCED_WEIGHTS
        stage_term = int(quantise(w["cost"] * stage_cost / scale + w["bom_lines"] * stage_lines))
    elif model.mode == "cost":
        stage_term = round(stage_cost / COST_RESOLUTION)
    else:
        stage_term = 0
    idx = np.array([res[parts[d].id] for d in ("R1", "R2", "R3")])
    e_f, e_a, share = e
    positions = stage_lines + 4  # the stage's codes, R1, R2, R3, C1
    primary = (
        stage_term
        + int(model.resistor_term(idx).sum())
        + int(model.capacitor_term(np.array([cap[parts["C1"].id]]))[0])
        + int(model.row_term(np.array([e_f]), np.array([e_a]), np.array([share]))[0])
        - model.shared_line_credit() * (positions - board.bom_lines)
    )
    secondary = int(model.secondary(np.array([e_f]), np.array([board.cost_per_board]))[0])
    return (primary, secondary)


def accepted_boards_of(
    name: str, spec: Spec, catalog: Catalog
) -> Iterator[tuple[dict[str, Part], tuple[Part, ...], AnyBoard, Any]]:
    """Every board of ``catalog`` the brute force accepts: (its stage, (R1, R2, R3, C1), the
    board, ``accepted``'s figures), by the full model, the stock for ``spec.build.boards``,
    ``limits.max_cost`` and, under a worst-case guarantee, the whole spread box."""
    lim = spec.limits
    for stage in stages(name, catalog):
        combos = list(
            itertools.product(
                catalog.resistors, catalog.resistors, catalog.resistors, catalog.capacitors
            )
        )
        near = in_bands_nearly(name, spec, stage, combos)
        for combo, close in zip(combos, near, strict=True):
            if not close:
                continue
            r1, r2, r3, c1 = combo
            board = board_of(name, {**stage, "R1": r1, "R2": r2, "R3": r3, "C1": c1})
            e = accepted(spec, board)
            if e is None:
                continue
            uses = board.uses().items()
            if any(catalog.get(pid).stock < spec.build.boards * n for pid, n in uses):
                continue
            if lim.max_cost is not None and board.cost_per_board > lim.max_cost + 1e-12:
                continue
            if lim.guarantee == "worst_case" and not inside_worst_case(spec, board):
                continue
            yield stage, combo, board, e


def reference(name: str, spec: Spec, catalog: Catalog) -> list[tuple[object, ...]]:
    """(score, stock codes by designator) of the brute force's top ``spec.ranking.top``,
    the codes in the board's BOM order."""
    model = build_model(spec, catalog, TOPOLOGIES[name])
    keyed = [
        (score_key(model, spec, board, stage, e), tuple(p.id for p in board.parts().values()))
        for stage, _, board, e in accepted_boards_of(name, spec, catalog)
    ]
    keyed.sort()
    return [(key[0], ids) for key, ids in keyed[: spec.ranking.top]]


def in_bands_nearly(
    name: str, spec: Spec, stage: dict[str, Part], combos: list[tuple[Part, ...]]
) -> list[bool]:
    """Whether each board of ``stage`` × ``combos`` (R1, R2, R3, C1) can be in the bands: for
    the zener-clamped loop (3 ms a board one by one) the topology's own ``predict`` at the
    boards' points all at once (the same function ``accepted`` evaluates, held equal to it
    at 1e-12 in tests/circuits/clamped_schmitt), bands widened by 1e-6; every board else."""
    if name != "clamped_schmitt":
        return [True] * len(combos)
    topology = TOPOLOGIES[name]
    rails = rails_from_supply(spec.supply)
    points = []
    for r1, r2, r3, c1 in combos:
        parts = {**stage, "R1": r1, "R2": r2, "R3": r3, "C1": c1}
        points.append(topology.board_point(board_from(topology, parts), rails, 25.0))
    fields = [f.name for f in dataclasses.fields(points[0])]
    stacked = type(points[0])(**{n: np.array([getattr(x, n) for x in points]) for n in fields})
    with np.errstate(all="ignore"):
        p = topology.predict(stacked, rails.v_ref)
        f, a = np.asarray(p.frequency_hz), np.asarray(p.amplitude_vpp)
    tf, ta = spec.target.tolerance_pct / 100 + 1e-6, spec.triangle.tolerance_pct / 100 + 1e-6
    f_t, a_t = spec.target.target_hz, spec.triangle.amplitude_vpp
    ok = (np.abs(f / f_t - 1) <= tf) & (np.abs(a / a_t - 1) <= ta)
    return [bool(x) for x in ok]


def inside_worst_case(spec: Spec, board: AnyBoard) -> bool:
    wc = worst_case(board, spec)
    f_t, a_t = spec.target.target_hz, spec.triangle.amplitude_vpp
    tf, ta = spec.target.tolerance_pct / 100, spec.triangle.tolerance_pct / 100
    (lo_f, hi_f), (lo_a, hi_a) = wc.frequency_hz, wc.amplitude_vpp
    return bool(
        f_t * (1 - tf) <= lo_f
        and hi_f <= f_t * (1 + tf)
        and a_t * (1 - ta) <= lo_a
        and hi_a <= a_t * (1 + ta)
    )


# --------------------------------------------------------------------------------------------
# Small seeded catalogs


def small_catalog(seed: int, n_res: int = 7, open_drain: bool = False) -> Catalog:
    """Resistors around the values these loops use, a few capacitors, one fast and one slow
    op amp, two push-pull comparators and an open-drain one: invented test parts. With
    ``open_drain`` the open-drain comparator alone (its edges unequal, its sink rating 20 mA)
    and resistors of 1-680 kΩ, so that pull-ups of a few kΩ meet the stiffness rule with the
    larger R2, R3."""
    rng = np.random.default_rng(seed)
    pool = eseries.values("E24", 1e3, 6.8e5) if open_drain else eseries.values("E24", 1e3, 2e5)
    values = sorted(rng.choice(pool, n_res, replace=False))
    res = tuple(
        Resistor(f"TR-{n}", float(v), float(rng.choice([1.0, 0.1, 5.0])), 100.0, "E24", 0.25,
                 "0603", float(rng.choice([0.002, 0.01, 0.05])), int(rng.choice([10**4, 70])))
        for n, v in enumerate(values)
    )  # fmt: skip
    cvals = sorted(rng.choice(eseries.values("E6", 470e-12, 47e-9), 3, replace=False))
    caps = tuple(
        Capacitor(f"TC-{n}", float(v), "C0G", float(rng.choice([1.0, 5.0])), 0.0, None, 50.0,
                  "0805", 0.05, 10**4)
        for n, v in enumerate(cvals)
    )  # fmt: skip
    ops = (
        OpAmp("TU-F", 2, 4.0, 36.0, 1.2, 1.2, 10.0, 8e6, 5e-8, 1e-3, 2e-11, 0.02, 0.6, 10**4),
        OpAmp("TU-S", 1, 3.0, 36.0, 1.5, 0.8, 0.5, 1e6, 1e-6, 2e-3, 5e-8, 0.02, 0.3, 10**4),
    )
    comparators = (
        Comparator("TK-PP", 1, "push-pull", 2.7, 36.0, 5e-8, 1e-8, 1e-8, 0.2, 0.3, 2e-3, 1e-9,
                   0.02, -0.2, 1.5, 0.5, 10**4),
        Comparator("TK-PS", 2, "push-pull", 2.7, 36.0, 4e-7, 1e-7, 6e-8, 0.1, 0.9, 4e-3, 5e-8,
                   0.01, -0.3, 1.5, 0.15, 10**4),
        Comparator("TK-OD", 2, "open-drain", 2.0, 36.0, 3e-7, 1e-7, 5e-8, 0.25, None, 2e-3,
                   25e-9, 0.006, -0.3, 1.5, 0.2, 10**4),
    )  # fmt: skip
    if open_drain:  # a stronger sink: pull-ups from 1.2 kΩ on the 24 V span
        comparators = tuple(dataclasses.replace(c, output_a=0.02) for c in comparators[2:])
    return Catalog(Path("<memory>"), res, caps, ops, comparators=comparators)


def clamp_catalog(seed: int) -> Catalog:
    """``small_catalog`` with four resistors (three around the clamp's series resistor) and
    two zeners (a 2 % 5.1 V and a 5 % 3.9 V, tested at 5 mA): invented test parts."""
    base = small_catalog(seed, n_res=4)
    rng = np.random.default_rng(seed + 100)
    extra = tuple(
        Resistor(f"TR-S{n}", v, 1.0, 100.0, "E24", 0.25, "0603", float(rng.choice([0.002, 0.01])),
                 10**4)
        for n, v in enumerate((1.0e3, 1.5e3, 2.2e3))
    )  # fmt: skip
    zeners = (
        Diode("TZ-Z5V1", "zener", 5.1, 5e-3, 2.0, -0.2, 55.0, 0.72, 0.5, 0.045, 10**4),
        Diode("TZ-Z3V9", "zener", 3.9, 5e-3, 5.0, -2.0, 85.0, 0.72, 0.5, 0.022, 10**4),
    )
    res = tuple(sorted((*base.resistors, *extra), key=lambda r: r.value_ohm))
    return Catalog(Path("<memory>"), res, base.capacitors, base.opamps[:1], diodes=zeners)


def spec_near(name: str, catalog: Catalog, guarantee: str, by: str, pick: int) -> Spec:
    """A spec whose target is one buildable board's nominal prediction (the ``pick``-th of
    them in sorted order), so that several boards meet it."""
    skeleton = parse_spec(spec_data(name, 1e3, 1.0, guarantee, by))
    rails = rails_from_supply(skeleton.supply)
    made = []
    rng = np.random.default_rng(pick)
    clamped = name == "clamped_schmitt"
    # an open-drain stage needs R2 and R3 large against R5 (the stiffness rule): every R3
    open_drain = bool(catalog.comparators) and all(c.is_open_drain for c in catalog.comparators)
    r3s = catalog.resistors[:: 1 if open_drain else 3]
    # the clamp's targets from its series resistors under 3 kΩ (the others cannot reach its
    # design point on these rails), to keep the scan short
    for stage in [s for s in stages(name, catalog) if not clamped or s["R5"].value < 3e3]:
        pull_up = "U2" in stage and "R5" in stage
        for r1, r2, r3, c1 in itertools.product(
            catalog.resistors[::2], catalog.resistors, r3s, catalog.capacitors
        ):
            if r1.value_ohm >= 0.8 * r2.value_ohm:
                continue
            board = board_of(name, {**stage, "R1": r1, "R2": r2, "R3": r3, "C1": c1})
            if pull_up and not stiff(stage["R5"], r2, r3):
                continue
            try:
                p = board.oscillator(rails).prediction()
            except ValueError:
                continue
            if not (np.isfinite(p.frequency_hz) and float(p.timing_share) < 0.1):
                continue
            if "R5" in stage and any(  # a pull-up overloading U2, a clamp off its design point
                w.severity == "error" for w in board.topology.check(board, rails)
            ):
                continue
            made.append((float(p.frequency_hz), float(p.amplitude_vpp)))
    assert made, "the test catalog builds nothing"
    made.sort()
    f, a = made[(pick * 7919) % len(made)]
    return parse_spec(spec_data(name, f * rng.uniform(0.99, 1.01), a, guarantee, by))


def stiff(r5: Part, r2: Resistor, r3: Resistor) -> bool:
    """The stiffness rule R5·(1/R3 + 1/R2) ≤ 0.1 (README, the comparator IC)."""
    assert isinstance(r5, Resistor)
    return r5.value_ohm * (1 / r3.value_ohm + 1 / r2.value_ohm) <= 0.1


def spec_data(name: str, f: float, a: float, guarantee: str, by: str) -> dict[str, object]:
    circuit = CIRCUIT_OF[name]
    return {
        "circuit": circuit,
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
        "frequency": {"target_hz": f, "tolerance_pct": 15.0 if guarantee != "nominal" else 3.0},
        "triangle": {"amplitude_vpp": a, "tolerance_pct": 15.0 if guarantee != "nominal" else 4.0},
        "environment": {"temp_min_c": 15.0, "temp_max_c": 45.0},
        "build": {"boards": 20},
        "limits": {"guarantee": guarantee, "max_timing_share": 0.2},
        "ranking": {"by": by, "top": 6},
    }


CASES = [
    ("comparator_schmitt", "nominal", "balanced", 1, False),
    ("comparator_schmitt", "nominal", "frequency_error", 2, False),
    ("comparator_schmitt", "nominal", "cost", 3, False),
    ("comparator_schmitt", "worst_case", "balanced", 4, False),
    ("comparator_schmitt", "worst_case", "frequency_error", 6, False),
    ("comparator_schmitt", "nominal", "balanced", 7, False),
    # open-drain U2 (unequal edges) with a pull-up R5 from the resistors
    ("comparator_schmitt", "nominal", "balanced", 15, True),
    ("comparator_schmitt", "nominal", "frequency_error", 12, True),
    ("comparator_schmitt", "worst_case", "balanced", 18, True),
    ("comparator_schmitt", "worst_case", "cost", 17, True),
    ("clamped_schmitt", "nominal", "balanced", 1, False),
    ("clamped_schmitt", "nominal", "cost", 2, False),
    ("clamped_schmitt", "worst_case", "balanced", 3, False),
    ("clamped_schmitt", "worst_case", "frequency_error", 4, False),
]


@pytest.mark.parametrize(("name", "guarantee", "by", "seed", "open_drain"), CASES)
def test_both_engines_return_the_full_model_top_k(
    name: str, guarantee: str, by: str, seed: int, open_drain: bool
) -> None:
    if name == "clamped_schmitt":
        catalog = clamp_catalog(seed)
    else:
        catalog = small_catalog(seed, open_drain=open_drain)
    spec = spec_near(name, catalog, guarantee, by, seed)
    for engine, result in both_engines_equal_the_brute_force(name, spec, catalog):
        assert all(c.topology == name for c in result.candidates), engine
        if name == "comparator_schmitt":  # a pull-up exactly where U2 is open drain
            assert all(("R5" in c.parts) == open_drain for c in result.candidates), engine


def both_engines_equal_the_brute_force(
    name: str, spec: Spec, catalog: Catalog
) -> list[tuple[str, Any]]:
    """Each engine's proven top equals ``reference`` (score and stock codes, in order); the
    results, by engine, for further checks."""
    expected = reference(name, spec, catalog)
    assert expected, "the spec admits no board: the case tests nothing"
    out = []
    for engine in ("enumerate", "cpsat"):
        result = design(spec, catalog, engine=engine, time_limit_s=60.0, samples=200)
        assert result.search.proven_optimal, engine
        got = [(c.score, tuple(p.id for p in c.parts.values())) for c in result.candidates]
        assert got == expected, engine
        out.append((engine, result))
    return out


def test_any_circuit_is_the_merge_of_each_circuits_answers() -> None:
    """``topology = "any"``: every searchable circuit's answers, merged by score (the
    README's rule), equal to running each circuit alone and merging."""
    catalog = small_catalog(5)
    base = spec_near("comparator_schmitt", catalog, "nominal", "balanced", 5)
    data = base.model_dump(mode="json")
    data["circuit"] = {"topology": "any"}
    spec_any = parse_spec(data)
    # every searchable circuit but the set-duty loop, which an "any" spec cannot ask for
    searchable = {n for n, t in TOPOLOGIES.items() if t.search_form() is not None}
    assert searchable - {"duty_schmitt"} == set(CIRCUIT_OF)
    assert [t.name for t in spec_topologies(spec_any)] == list(CIRCUIT_OF)
    alone = []
    for name, circuit in CIRCUIT_OF.items():
        result = design(parse_spec(dict(data, circuit=circuit)), catalog, time_limit_s=60.0)
        alone += [(c.score, ORDER[name], c.rank, name, c) for c in result.candidates]
    alone.sort(key=lambda x: x[:3])
    merged = design(spec_any, catalog, time_limit_s=60.0)
    assert merged.search.proven_optimal
    want = [(name, tuple(p.id for p in c.parts.values())) for _, _, _, name, c in alone[:6]]
    got = [(c.topology, tuple(p.id for p in c.parts.values())) for c in merged.candidates]
    assert got == want


CIRCUIT_OF = {
    "opamp_schmitt": {},
    "comparator_schmitt": {"schmitt": "comparator"},
    "clamped_schmitt": {"clamp": "zener"},
}
ORDER = {name: n for n, name in enumerate(TOPOLOGIES)}


def common_mode_spec(catalog: Catalog) -> tuple[Spec, int]:
    """A 5 V single-supply comparator spec whose target lies between a board the rules accept
    and the board of the same U1, R1, R2, R3 and C1 with the other U2 that only U2's input
    common-mode range rules out (the topology's check input_common_mode), and how many boards
    in the bands that range alone rules out."""
    data = spec_data("comparator_schmitt", 1e3, 1.0, "nominal", "balanced")
    data["supply"] = {"positive_v": 5.0, "negative_v": 0.0, "tolerance_pct": 5.0}
    rails = rails_from_supply(parse_spec(data).supply)
    ok: dict[tuple[str, ...], tuple[float, float]] = {}
    only_cm: dict[tuple[str, ...], tuple[float, float]] = {}
    for stage in stages("comparator_schmitt", catalog):
        for r1, r2, r3, c1 in itertools.product(
            catalog.resistors, catalog.resistors, catalog.resistors[::2], catalog.capacitors
        ):
            if r1.value_ohm >= 0.8 * r2.value_ohm:
                continue
            board = board_of(
                "comparator_schmitt", {**stage, "R1": r1, "R2": r2, "R3": r3, "C1": c1}
            )
            try:
                p = board.oscillator(rails).prediction()
            except ValueError:
                continue
            if float(p.timing_share) >= 0.1:
                continue
            errors = {w.code for w in board.topology.check(board, rails) if w.severity == "error"}
            key = (stage["U1"].id, r1.id, r2.id, r3.id, c1.id)
            figures = (float(p.frequency_hz), float(p.amplitude_vpp))
            if not errors:
                ok[key] = figures
            elif errors == {"input_common_mode"}:
                only_cm[key] = figures
    both = sorted(set(ok) & set(only_cm), key=lambda k: -ok[k][1])
    assert both, "the common-mode range rules out no board: the case tests nothing"
    (f1, a1), (f2, a2) = ok[both[0]], only_cm[both[0]]
    f, a = float(np.sqrt(f1 * f2)), float(np.sqrt(a1 * a2))  # the target between the two
    data["frequency"] = {"target_hz": f, "tolerance_pct": 5.0}
    data["triangle"] = {"amplitude_vpp": a, "tolerance_pct": 10.0}
    near = sum(
        np.log(0.95) <= np.log(g / f) <= np.log(1.05)
        and np.log(0.9) <= np.log(b / a) <= np.log(1.1)
        for g, b in only_cm.values()
    )
    return parse_spec(data), near


@pytest.mark.parametrize("seed", [2, 5, 7])
def test_the_common_mode_limit_binds_and_both_engines_agree(seed: int) -> None:
    """On a 5 V single supply U2's + input range (1.5 V below V+ on the test comparators)
    rules out boards near the target: the brute force rejects them by the topology's check,
    the search by its acceptance (and its k ceiling); both engines return the brute force's
    top."""
    catalog = small_catalog(seed)
    catalog = dataclasses.replace(catalog, comparators=catalog.comparators[:2])  # push-pull
    spec, ruled_out = common_mode_spec(catalog)
    assert ruled_out > 0
    for engine, result in both_engines_equal_the_brute_force("comparator_schmitt", spec, catalog):
        assert result.search.dropped_by_full_model == 0, engine  # none proposed, none dropped
