"""The set-duty loop's search against brute force over its FULL model.

Reference, written here and independent of the search form, its windows, bounds and pruning
(``search.branches``): every board of a small catalog (U1 × a signal diode for D3 = D4 × R1,
R2, R3A, R3B × C1) predicted by the topology's own model (``duty_schmitt.physics
.predict_point``, itself checked against ngspice in tests/circuits) at nominal values, 25 °C
and the nominal rails, accepted by the README's rules (frequency, amplitude and duty bands;
both ramps running; the triangle's peaks inside the square levels; the integrator's slew, the
smaller of rise and fall, at least the steeper ramp; timing share within
``max_timing_share``; C1's rating over the largest peak with the amplitude margin; stock for
every piece; cost; no check of error severity), then by the worst case over the spread box
under that guarantee, and ranked by the documented score (README, "Ranking", the duty term
included). Both engine names run the one two-branch lister.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest

from tristock.analysis.worstcase import worst_case
from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import AnyBoard, board_from, rails_from_supply
from tristock.circuits.diode import thermal_voltage
from tristock.circuits.duty_schmitt.physics import DutyPoint, predict_point
from tristock.circuits.rails import OpAmpModel
from tristock.designs import design
from tristock.designs.reoptimise import reoptimise
from tristock.search.model import BALANCED_WEIGHTS, COST_RESOLUTION, build_model, quantise
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Resistor
from tristock.stock.tables import Catalog

DUTY = TOPOLOGIES["duty_schmitt"]


def duty_catalog(seed: int) -> Catalog:
    """Six resistors of 2-510 kΩ, three C0G capacitors, a fast and a slow op amp, a silicon
    and a Schottky signal diode: invented test parts."""
    rng = np.random.default_rng(seed)
    values = sorted(rng.choice(eseries.values("E24", 2e3, 5.1e5), 6, replace=False))
    res = tuple(
        Resistor(f"TR-{n}", float(v), float(rng.choice([1.0, 0.1, 5.0])), 100.0, "E24", 0.25,
                 "0603", float(rng.choice([0.002, 0.01, 0.05])), int(rng.choice([10**4, 70])))
        for n, v in enumerate(values)
    )  # fmt: skip
    cvals = sorted(rng.choice(eseries.values("E6", 1e-9, 47e-9), 3, replace=False))
    caps = tuple(
        Capacitor(f"TC-{n}", float(v), "C0G", float(rng.choice([1.0, 5.0])), 0.0, None, 50.0,
                  "0805", 0.05, 10**4)
        for n, v in enumerate(cvals)
    )  # fmt: skip
    ops = (
        OpAmp("TU-F", 2, 4.0, 36.0, 1.2, 1.2, 10.0, 8e6, 5e-8, 1e-3, 2e-11, 0.02, 0.6, 10**4),
        OpAmp("TU-S", 1, 3.0, 36.0, 1.5, 0.8, 0.5, 1e6, 1e-6, 2e-3, 5e-8, 0.02, 0.3, 10**4),
    )
    diodes = (
        Diode("TD-SI", "signal", None, None, 10.0, -2.0, 0.8, 0.62, 0.5, 0.012, 10**4),
        Diode("TD-SK", "signal", None, None, 15.0, -1.2, 5.0, 0.30, 0.2, 0.05, 10**4),
    )
    return Catalog(Path("<memory>"), res, caps, ops, diodes=diodes)


def all_boards(catalog: Catalog) -> list[tuple[OpAmp, Diode, tuple[Resistor, ...], Capacitor]]:
    return [
        (u1, d, (r1, r2, ra, rb), c1)
        for u1, d in itertools.product(catalog.opamps, catalog.diodes)
        for r1, r2, ra, rb in itertools.product(catalog.resistors, repeat=4)
        for c1 in catalog.capacitors
    ]


def predictions(spec: Spec, boards: list[tuple[OpAmp, Diode, tuple[Resistor, ...], Capacitor]]):
    """The model's prediction of every board at once (arrays), and each board's square
    levels (VH, VL) from the reference."""
    rails = rails_from_supply(spec.supply)

    def col(get) -> np.ndarray:
        return np.array([get(b) for b in boards], dtype=float)

    models = [OpAmpModel.from_part(b[0]) for b in boards]

    def m(name: str) -> np.ndarray:
        return np.array([getattr(x, name) for x in models], dtype=float)

    point = DutyPoint(
        r1=col(lambda b: b[2][0].value_ohm), r2=col(lambda b: b[2][1].value_ohm),
        r3a=col(lambda b: b[2][2].value_ohm), r3b=col(lambda b: b[2][3].value_ohm),
        c1=col(lambda b: b[3].value_f), v_pos=rails.v_pos, v_neg=rails.v_neg,
        swing_pos=m("swing_pos_v"), swing_neg=m("swing_neg_v"),
        slew_rise=m("slew_rise_v_per_s"), slew_fall=m("slew_fall_v_per_s"), delay=m("delay_s"),
        gbw=m("gbw_hz"), vos1=m("offset_v"), ib1=m("bias_a"), vos2=m("comparator_offset_v"),
        ib2=m("comparator_bias_a"), vf3=col(lambda b: b[1].vf_v), rs3=col(lambda b: b[1].rz_ohm),
        vf4=col(lambda b: b[1].vf_v), rs4=col(lambda b: b[1].rz_ohm),
        vt_therm=float(thermal_voltage(25.0)),
    )  # fmt: skip
    with np.errstate(all="ignore"):
        p = predict_point(point, rails.v_ref)
    vh = rails.v_pos - m("swing_pos_v") - rails.reference_v
    vl = rails.reference_v - (rails.v_neg + m("swing_neg_v"))
    return p, vh, vl, np.minimum(m("slew_rise_v_per_s"), m("slew_fall_v_per_s"))


def accepted_boards(spec: Spec, catalog: Catalog) -> list[tuple[tuple[int, int], AnyBoard]]:
    """Every board the README's rules accept, with its (primary, secondary) score."""
    boards = all_boards(catalog)
    p, vh, vl, slew = predictions(spec, boards)
    tf, ta = spec.target.tolerance_pct / 100, spec.triangle.tolerance_pct / 100
    d_lo, d_hi = spec.circuit.duty_band
    with np.errstate(all="ignore"):
        e_f = np.log(p.frequency_hz / spec.target.target_hz)
        e_a = np.log(p.amplitude_vpp / spec.triangle.amplitude_vpp)
        peak = np.fmax(np.abs(p.peak_high_v), np.abs(p.peak_low_v))
        ok = (np.log1p(-tf) <= e_f) & (e_f <= np.log1p(tf))
        ok &= (np.log1p(-ta) <= e_a) & (e_a <= np.log1p(ta))
        ok &= (p.duty_high >= d_lo) & (p.duty_high <= d_hi)
        ok &= (p.peak_high_v < vh) & (p.peak_low_v > -vl) & (p.slope_v_per_s <= slew)
        ok &= p.timing_share <= spec.limits.max_timing_share
        ok &= np.array([b[3].voltage_v for b in boards]) >= peak * (1 + ta)
    model = build_model(spec, catalog, DUTY)
    rails = rails_from_supply(spec.supply)
    lim = spec.limits
    found = []
    for n in np.flatnonzero(ok):
        u1, d, (r1, r2, ra, rb), c1 = boards[n]
        board = board_from(DUTY, {"U1": u1, "R1": r1, "R2": r2, "R3A": ra, "R3B": rb,
                                  "C1": c1, "D3": d, "D4": d})  # fmt: skip
        if any(catalog.get(pid).stock < spec.build.boards * k for pid, k in board.uses().items()):
            continue
        if lim.max_cost is not None and board.cost_per_board > lim.max_cost + 1e-12:
            continue
        if any(w.severity == "error" for w in DUTY.check(board, rails)):
            continue
        if lim.guarantee == "worst_case" and not inside_worst_case(spec, board):
            continue
        key = score_key(model, spec, board, (e_f[n], e_a[n], p.timing_share[n], p.duty_high[n]))
        found.append((key, board))
    return found


def reference(spec: Spec, catalog: Catalog) -> list[tuple[int, tuple[str, ...]]]:
    """(score, stock codes in BOM order) of the brute force's top ``spec.ranking.top``, ties
    by stock codes as the search's rank key (the stage's codes by designator, then R1, R2,
    R3A, R3B, C1)."""
    keyed = [(key, codes(board), board) for key, board in accepted_boards(spec, catalog)]
    keyed.sort(key=lambda item: (item[0], item[1]))
    return [(key[0], ids_of(board)) for key, _, board in keyed[: spec.ranking.top]]


def codes(board: AnyBoard) -> tuple[str, ...]:
    """The search's tie order of stock codes: the stage's (D3, D4, U1 joined), then R1, R2,
    R3A, R3B, C1."""
    parts = board.parts()
    stage = "+".join(parts[d].id for d in ("D3", "D4", "U1"))
    return (stage, *(parts[d].id for d in ("R1", "R2", "R3A", "R3B", "C1")))


def ids_of(board: AnyBoard) -> tuple[str, ...]:
    return tuple(p.id for p in board.parts().values())


def inside_worst_case(spec: Spec, board: AnyBoard) -> bool:
    wc = worst_case(board, spec)
    (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
    d_lo, d_hi = spec.circuit.duty_band
    f0, a0 = spec.target.target_hz, spec.triangle.amplitude_vpp
    return (
        all(fa <= np.log(f / f0) <= fb for f in wc.frequency_hz)
        and all(aa <= np.log(a / a0) <= ab for a in wc.amplitude_vpp)
        and d_lo <= wc.duty_high[0] <= wc.duty_high[1] <= d_hi
    )


def score_key(model, spec: Spec, board: AnyBoard, e: tuple[float, ...]) -> tuple[int, int]:
    """The documented rank key: U1 and the diodes one stage term, each resistor and C1 its
    own, errors, timing share and duty, a shared stock code credited per line saved."""
    parts = board.parts()
    stage = {k: parts[k] for k in ("U1", "D3", "D4")}
    u1 = stage["U1"]
    stage_cost = u1.unit_cost * u1.packages_per_board + stage["D3"].unit_cost * 2
    stage_lines = len({p.id for p in stage.values()})
    scale = spec.limits.max_cost or 1.0
    e_f, e_a, share, duty = e
    w = BALANCED_WEIGHTS
    if model.mode == "balanced":
        stage_term = int(quantise(w["cost"] * stage_cost / scale + w["bom_lines"] * stage_lines))
        d_lo, d_hi = spec.circuit.duty_band
        target = spec.circuit.duty_pct / 100
        duty_term = int(quantise(w["duty_error"] * abs(duty - target) / (0.5 * (d_hi - d_lo))))
    elif model.mode == "cost":
        stage_term, duty_term = round(stage_cost / COST_RESOLUTION), 0
    else:
        stage_term, duty_term = 0, 0
    res = {p.id: n for n, p in enumerate(model.resistors.parts)}
    cap = {p.id: n for n, p in enumerate(model.capacitors.parts)}
    idx = np.array([res[parts[d].id] for d in ("R1", "R2", "R3A", "R3B")])
    positions = stage_lines + 5
    primary = (
        stage_term
        + int(model.resistor_term(idx).sum())
        + int(model.capacitor_term(np.array([cap[parts["C1"].id]]))[0])
        + int(model.row_term(np.array([e_f]), np.array([e_a]), np.array([share]))[0])
        + duty_term
        - model.shared_line_credit() * (positions - board.bom_lines)
    )
    secondary = int(model.secondary(np.array([e_f]), np.array([board.cost_per_board]))[0])
    return primary, secondary


def spec_near(catalog: Catalog, guarantee: str, by: str, pick: int, wide: bool = False) -> Spec:
    """A spec whose target is one board's nominal prediction (a board with a duty of 15-40 %
    and a small timing share, the ``pick``-th of them), so that several boards meet it."""
    probe = parse_spec(spec_data(1e3, 4.0, 25.0, guarantee, by))
    boards = all_boards(catalog)
    p, _, _, _ = predictions(probe, boards)
    with np.errstate(all="ignore"):
        good = (p.duty_high > 0.15) & (p.duty_high < 0.4) & (p.timing_share < 0.05)
        good &= (p.amplitude_vpp > 2.0) & (p.amplitude_vpp < 12.0)
    n = np.flatnonzero(good)
    assert len(n), "no board of the catalog makes a ramp: the case tests nothing"
    at = n[(pick * 7919) % len(n)]
    return parse_spec(
        spec_data(
            float(p.frequency_hz[at]), float(p.amplitude_vpp[at]),
            round(100 * float(p.duty_high[at]), 1), guarantee, by, wide,
        )
    )  # fmt: skip


def spec_data(
    f: float, a: float, duty: float, guarantee: str, by: str, wide: bool = False
) -> dict[str, object]:
    """Bands of ±4 % (f), ±5 % (A) and ±3 points (duty); ±15 %, ±15 % and ±6 points under a
    guarantee other than nominal, or ``wide``."""
    wide = wide or guarantee != "nominal"
    return {
        "circuit": {"duty_pct": duty, "duty_tolerance_pct": 6.0 if wide else 3.0},
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 5.0},
        "frequency": {"target_hz": f, "tolerance_pct": 15.0 if wide else 4.0},
        "triangle": {"amplitude_vpp": a, "tolerance_pct": 15.0 if wide else 5.0},
        "environment": {"temp_min_c": 15.0, "temp_max_c": 45.0},
        "build": {"boards": 20},
        "limits": {"guarantee": guarantee, "max_timing_share": 0.1},
        "ranking": {"by": by, "top": 6},
    }


CASES = [
    ("nominal", "balanced", 1),
    ("nominal", "frequency_error", 2),
    ("nominal", "cost", 3),
    ("nominal", "balanced", 4),
    ("worst_case", "balanced", 5),
]


@pytest.mark.parametrize(("guarantee", "by", "seed"), CASES)
def test_the_duty_search_returns_the_full_model_top_k(guarantee: str, by: str, seed: int) -> None:
    catalog = duty_catalog(seed)
    spec = spec_near(catalog, guarantee, by, seed)
    expected = reference(spec, catalog)
    assert expected, "the spec admits no board: the case tests nothing"
    for engine in ("enumerate", "cpsat"):
        result = design(spec, catalog, engine=engine, time_limit_s=60.0, samples=200)
        assert result.search.proven_optimal, engine
        got = [(c.score, tuple(p.id for p in c.parts.values())) for c in result.candidates]
        assert got == expected, engine
        assert all(c.topology == "duty_schmitt" for c in result.candidates)


POSITIONS = ("U1", "R1", "R2", "R3A", "R3B", "C1", "D3", "D4")


#: Answers of 1 to 5 changes (a diode pair with R3B; U1 changed in one answer, R3A in the
#: next), and a case with none (every board left is outside the bands).
REOPTIMISE_CASES = [(4, "R3B"), (6, "R1"), (7, "R3B"), (7, "C1"), (2, "D3"), (1, "R3B")]


@pytest.mark.parametrize(("seed", "withdrawn"), REOPTIMISE_CASES)
def test_reoptimise_finds_the_fewest_changes(seed: int, withdrawn: str) -> None:
    """A board of the brute force's top with one part withdrawn: ``reoptimise`` gives the
    brute force's fewest changed positions and its best answers in order (ties: fewer stage
    positions changed, C1 kept, then the codes), proven."""
    catalog = duty_catalog(seed)
    spec = spec_near(catalog, "nominal", "balanced", seed, wide=True)
    boards = accepted_boards(spec, catalog)
    assert boards, "the spec admits no board: the case tests nothing"
    current_board = min(boards, key=lambda kb: (kb[0], codes(kb[1])))[1]
    current = {d: p.id for d, p in current_board.parts().items()}
    gone = current[withdrawn]
    left = []
    for key, board in boards:
        parts = board.parts()
        if gone in {p.id for p in parts.values()}:
            continue
        changed = [d for d in POSITIONS if parts[d].id != current[d]]
        stage_changes = sum(d in changed for d in ("U1", "D3", "D4"))
        order = (key[0], key[1], stage_changes, "C1" in changed, *codes(board))
        left.append((len(changed), order, changed, ids_of(board)))
    result = reoptimise(spec, catalog, current, without=[gone], time_limit_s=60.0, samples=200)
    assert result.search.proven_optimal
    if not left:
        assert result.candidates == [] and result.infeasible is not None
        return
    fewest = min(n for n, *_ in left)
    expected = sorted(item[1:] for item in left if item[0] == fewest)[: spec.ranking.top]
    got = [(c.changed, tuple(p.id for p in c.parts.values())) for c in result.candidates]
    assert got == [(changed, ids) for _, changed, ids in expected]
