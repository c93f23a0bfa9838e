"""Tests for tristock.analysis.worstcase: extremes over the whole spread box, not only its corners.

The reference is brute force over the model, written here from the spread variables'
definitions (``tristock.analysis.spread`` docstring) straight onto ``physics.predict``: every
corner of every variable except the rails, times a dense grid over each rail. All parts are
invented test rows (stock codes RT-/CT-/UT-).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import numpy.typing as npt
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tristock.analysis.worstcase import box_extremes, worst_case
from tristock.circuits.board import Design
from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.parts import Capacitor, OpAmp, Resistor

FloatArray = npt.NDArray[np.float64]
METRICS = ("frequency_hz", "amplitude_vpp", "duty_high")


def resistor(code: str, value: float, tol: float = 0.0, tc: float = 0.0) -> Resistor:
    return Resistor(code, value, tol, tc, "E96", 0.25, "0603", 0.01, 1000)


def capacitor(value: float, tol: float = 0.0, tc: float = 0.0) -> Capacitor:
    return Capacitor("CT-1", value, "C0G", tol, tc, None, 50.0, "0805", 0.05, 1000)


def opamp(**kw: float) -> OpAmp:
    """An ideal op amp unless overridden: 1 V headroom, no slew limit, delay, offset or bias."""
    row: dict[str, float] = {
        "swing_pos_v": 1.0,
        "swing_neg_v": 1.0,
        "slew_v_per_us": math.inf,
        "gbw_hz": math.inf,
        "delay_s": 0.0,
        "offset_v": 0.0,
        "bias_a": 0.0,
    }
    row.update(kw)
    return OpAmp("UT-1", 2, 3.0, 40.0, output_a=0.02, unit_cost=0.5, stock=100, **row)


def make_spec(
    v_pos: float,
    v_neg: float,
    rail_tol: float,
    t_min: float = 25.0,
    t_max: float = 25.0,
    v_ref: float | None = None,
) -> Spec:
    supply: dict[str, float] = {"positive_v": v_pos, "negative_v": v_neg, "tolerance_pct": rail_tol}
    if v_ref is not None:
        supply["reference_v"] = v_ref
    return parse_spec(
        {
            "supply": supply,
            "frequency": {"target_hz": 2500.0, "tolerance_pct": 5.0},
            "triangle": {"amplitude_vpp": 6.0, "tolerance_pct": 20.0},
            "environment": {"temp_min_c": t_min, "temp_max_c": t_max},
        }
    )


# --------------------------------------------------------------------------------------------
# Brute force over the model (the reference)


def _ends(low: float, high: float) -> list[float]:
    return [low] if low == high else [low, high]


#: Columns of a setting: R1, R2, R3, C1 at 25 °C, T (°C), Vos1, Vos2, bias (V, A, both inputs),
#: slew (V/s), delay (s), V+, V-.
COLUMNS = ("r1", "r2", "r3", "c1", "temp", "vos1", "vos2", "bias", "slew", "delay", "vp", "vn")


def model_metrics(design: Design, spec: Spec, setting: FloatArray) -> FloatArray:
    """Frequency, amplitude and duty (rows, 3) at settings (rows, COLUMNS) by
    ``physics.predict``: each value moved by value·(1 + tc·(T - 25 °C)); square levels
    VH = V+ - swing_pos - ref, VL = ref - (V- + swing_neg), ref 0 V for split rails, the
    spec's reference or (V+ + V-)/2 for a single supply."""
    u, supply = design.u1, spec.supply
    c = dict(zip(COLUMNS, setting.T, strict=True))
    dt = c["temp"] - 25.0
    r1 = c["r1"] * (1 + design.r1.tempco_ppm * 1e-6 * dt)
    r2 = c["r2"] * (1 + design.r2.tempco_ppm * 1e-6 * dt)
    r3 = c["r3"] * (1 + design.r3.tempco_ppm * 1e-6 * dt)
    c1 = c["c1"] * (1 + (design.c1.tempco_ppm or 0.0) * 1e-6 * dt)
    vp, vn = c["vp"], c["vn"]
    if supply.negative_v < 0:
        ref = np.zeros_like(vp)
    elif supply.reference_v is not None:
        ref = np.full_like(vp, supply.reference_v)
    else:
        ref = (vp + vn) / 2
    pred = predict(
        r1,
        r2,
        r3,
        c1,
        vp - u.swing_pos_v - ref,
        ref - (vn + u.swing_neg_v),
        slew_rise=c["slew"],
        slew_fall=c["slew"],
        delay=c["delay"],
        gbw=u.gbw_hz,
        integrator_gbw=u.gbw_hz,
        vos1=c["vos1"],
        ib1=c["bias"],
        vos2=c["vos2"],
        ib2=c["bias"],
    )
    return np.stack([np.asarray(getattr(pred, m)) for m in METRICS], axis=1)


def brute_force(
    design: Design, spec: Spec, v_pos: FloatArray, v_neg: FloatArray, chunk: int = 64
) -> tuple[FloatArray, FloatArray]:
    """(min, max) of frequency, amplitude and duty over every combination of: R1, R2, R3, C1
    at value·(1 ± tol); T at both ends; Vos1 and Vos2 at ± the typical offset; bias (both
    inputs) at 0 and 2x typical; slew ·(1 ± SLEW_SPREAD); delay ·(1 ± DELAY_SPREAD); and every
    pair of rail values (V+ from ``v_pos``, V- from ``v_neg``)."""
    u, env = design.u1, spec.environment
    parts = [(r.value_ohm, r.tolerance_pct) for r in (design.r1, design.r2, design.r3)]
    parts.append((design.c1.value_f, design.c1.tolerance_pct))
    slew = u.slew_v_per_s
    dims = [_ends(v * (1 - tol / 100), v * (1 + tol / 100)) for v, tol in parts]
    dims += [
        _ends(env.temp_min_c, env.temp_max_c),
        _ends(-u.offset_v, u.offset_v),
        _ends(-u.offset_v, u.offset_v),
        _ends(0.0, 2 * u.bias_a),
        _ends(slew * (1 - SLEW_SPREAD), slew * (1 + SLEW_SPREAD)),
        _ends(u.delay_s * (1 - DELAY_SPREAD), u.delay_s * (1 + DELAY_SPREAD)),
    ]
    corners = np.array(list(itertools.product(*dims)))
    rails = np.array(list(itertools.product(v_pos, v_neg)))
    lo, hi = np.full(3, np.inf), np.full(3, -np.inf)
    for first in range(0, len(corners), chunk):
        c = np.repeat(corners[first : first + chunk], len(rails), axis=0)
        vals = model_metrics(
            design, spec, np.hstack([c, np.tile(rails, (len(c) // len(rails), 1))])
        )
        lo, hi = np.minimum(lo, vals.min(axis=0)), np.maximum(hi, vals.max(axis=0))
    return lo, hi


def setting_of(
    design: Design, spec: Spec, names: tuple[str, ...], z: tuple[float, ...]
) -> FloatArray:
    """The setting (1, COLUMNS) at deviations z of the named spread variables, from their
    definitions (``analysis.spread`` docstring); a variable not named sits at its centre."""
    u, env, supply = design.u1, spec.environment, spec.supply
    dev = dict(zip(names, z, strict=True))
    tol_v = supply.tolerance_pct / 100
    row = {
        "r1": design.r1.value_ohm * (1 + design.r1.tolerance_pct / 100 * dev.get("R1", 0.0)),
        "r2": design.r2.value_ohm * (1 + design.r2.tolerance_pct / 100 * dev.get("R2", 0.0)),
        "r3": design.r3.value_ohm * (1 + design.r3.tolerance_pct / 100 * dev.get("R3", 0.0)),
        "c1": design.c1.value_f * (1 + design.c1.tolerance_pct / 100 * dev.get("C1", 0.0)),
        "temp": (env.temp_min_c + env.temp_max_c) / 2
        + (env.temp_max_c - env.temp_min_c) / 2 * dev.get("T", 0.0),
        "vos1": u.offset_v * dev.get("U1.offset.integrator", 0.0),
        "vos2": u.offset_v * dev.get("U1.offset.comparator", 0.0),
        "bias": u.bias_a * (1 + dev.get("U1.bias", 0.0)),
        "slew": u.slew_v_per_s * (1 + SLEW_SPREAD * dev.get("U1.slew", 0.0)),
        "delay": u.delay_s * (1 + DELAY_SPREAD * dev.get("U1.delay", 0.0)),
        "vp": supply.positive_v * (1 + tol_v * dev.get("V+", 0.0)),
        "vn": supply.negative_v * (1 + tol_v * dev.get("V-", 0.0)),
    }
    if env.temp_max_c == env.temp_min_c:
        row["temp"] = env.temp_min_c
    return np.array([[row[k] for k in COLUMNS]])


def rail_grid(spec: Spec, points: int) -> tuple[FloatArray, FloatArray]:
    """``points`` values of each rail over rail·(1 ± tol); V- = 0 stays 0."""
    t = spec.supply.tolerance_pct / 100
    v_pos = spec.supply.positive_v * np.linspace(1 - t, 1 + t, points)
    v_neg = spec.supply.negative_v * np.linspace(1 - t, 1 + t, points)
    return v_pos, v_neg if spec.supply.negative_v != 0 else np.zeros(1)


def reported(design: Design, spec: Spec) -> tuple[FloatArray, FloatArray]:
    wc = worst_case(design, spec)
    lo = np.array([getattr(wc, m)[0] for m in METRICS])
    hi = np.array([getattr(wc, m)[1] for m in METRICS])
    return lo, hi


# --------------------------------------------------------------------------------------------
# The interior frequency maximum between the rail corners


def counterexample() -> tuple[Design, Spec]:
    """Rails +12 V / -10 V, each ±10 % independently, 0..70 °C; an op amp with 1.5 V / 0.3 V
    headroom, 13 V/µs (±20 %), 1.2 µs delay (±30 %), 3 MHz, 3 mV, 30 pA."""
    u1 = opamp(
        swing_pos_v=1.5,
        swing_neg_v=0.3,
        slew_v_per_us=13.0,
        gbw_hz=3e6,
        delay_s=1.2e-6,
        offset_v=3e-3,
        bias_a=3e-11,
    )
    design = Design(
        u1,
        resistor("RT-1", 10.7e3, 1.0, 100.0),
        resistor("RT-2", 38.3e3, 0.1, 25.0),
        resistor("RT-3", 51.1e3, 1.0, 100.0),
        capacitor(6.8e-9, 2.0, -200.0),
    )
    return design, make_spec(12.0, -10.0, 10.0, 0.0, 70.0)


def test_frequency_maximum_inside_the_rail_box_is_bounded() -> None:
    design, spec = counterexample()
    v_pos, v_neg = rail_grid(spec, 2)
    _, corner_hi = brute_force(design, spec, v_pos, v_neg)
    # Brute force over the model: at V+ = 10.8 V, V- = -9.595 V (every other variable at
    # every corner) the frequency beats every corner of the box by about 0.1 %.
    _, point_hi = brute_force(design, spec, np.array([10.8]), np.array([-9.595]))
    assert point_hi[0] > corner_hi[0] * (1 + 5e-4)
    wc = worst_case(design, spec)
    assert wc.method == "corners+box"
    assert wc.frequency_hz[1] >= point_hi[0]
    assert wc.corners["frequency_hz_hi"]["V+"] == "10.8 V (-10 %)"
    assert box_extremes(design, spec, ["frequency_hz"])["frequency_hz"][1] >= point_hi[0]


def test_ideal_switch_frequency_maximum_is_the_balanced_swing() -> None:
    # Ideal switch (DESIGN.md): f = VH·VL/(k·R3·C1·(VH + VL)²) <= 1/(4·k·R3·C1), equal at
    # VH = VL (AM-GM, common practice). With +12 V / -10 V ± 10 % and 1 V headroom the
    # balanced line VH = VL crosses the rail box away from its corners.
    design = Design(
        opamp(), resistor("RT-1", 10e3), resistor("RT-2", 20e3), resistor("RT-3", 10e3, 1.0),
        capacitor(10e-9),
    )  # fmt: skip
    wc = worst_case(design, make_spec(12.0, -10.0, 10.0))
    assert wc.variables == ("R3", "V+", "V-")
    assert wc.frequency_hz[1] == pytest.approx(1 / (4 * 0.5 * 10e3 * 0.99 * 10e-9), rel=1e-12)
    vh, vl = 12 * 1.1 - 1, 10 * 0.9 - 1  # the corner farthest from balance
    f_lo = vh * vl / (0.5 * 10e3 * 1.01 * 10e-9 * (vh + vl) ** 2)
    assert wc.frequency_hz[0] == pytest.approx(f_lo, rel=1e-12)


def test_single_supply_with_a_fixed_reference_balances_on_the_one_rail() -> None:
    # Single 12 V ± 10 % with a fixed reference and 1 V headroom; f = VH·VL/(k·R3·C1·(VH +
    # VL)²) is largest where VH/VL is nearest 1 (AM-GM, common practice). Reference 5 V:
    # VH = V+ - 6 V runs over 4.8..7.2 V, VL = 4 V, so the nearest is the corner V+ = 10.8 V.
    # Reference 6.3 V: VH = V+ - 7.3 V, VL = 5.3 V, equal at V+ = 12.6 V, inside the range.
    design = Design(
        opamp(), resistor("RT-1", 10e3), resistor("RT-2", 20e3), resistor("RT-3", 10e3),
        capacitor(10e-9),
    )  # fmt: skip
    outside = worst_case(design, make_spec(12.0, 0.0, 10.0, v_ref=5.0))
    vh, vl = 10.8 - 6.0, 4.0
    assert outside.frequency_hz[1] == pytest.approx(
        vh * vl / (0.5 * 1e-4 * (vh + vl) ** 2), rel=1e-12
    )
    inside = worst_case(design, make_spec(12.0, 0.0, 10.0, v_ref=6.3))
    assert inside.variables == ("V+",)
    assert inside.frequency_hz[1] == pytest.approx(1 / (4 * 0.5 * 1e-4), rel=1e-12)
    assert inside.corners["frequency_hz_hi"]["V+"] == "12.6 V (+5 %)"


def test_temperature_extreme_inside_the_range_is_found() -> None:
    # value(T) = value·(1 + tc·(T - 25 °C)) (DESIGN.md): R3 at +50 and C1 at -50 ppm/°C give
    # R3·C1 ∝ 1 - 2.5e-9·(T - 25)², largest at 25 °C, so f is smallest there, inside
    # -40..85 °C; the ends give f/(1 - 2.5e-9·(T - 25)²) (algebra, common practice).
    design = Design(
        opamp(), resistor("RT-1", 10e3), resistor("RT-2", 20e3),
        resistor("RT-3", 10e3, 0.0, 50.0), capacitor(10e-9, 0.0, -50.0),
    )  # fmt: skip
    wc = worst_case(design, make_spec(12.0, -12.0, 0.0, -40.0, 85.0))
    assert wc.variables == ("T",)
    assert wc.frequency_hz[0] == pytest.approx(5000.0, rel=1e-13)
    assert wc.corners["frequency_hz_lo"]["T"] == "25 °C"
    ends = [5000.0 / (1 - 2.5e-9 * (t - 25) ** 2) for t in (-40.0, 85.0)]
    assert wc.frequency_hz[1] == pytest.approx(max(ends), rel=1e-12)
    assert min(ends) > 5000.0 * (1 + 5e-6)


# --------------------------------------------------------------------------------------------
# Against a dense grid over the rails times every corner of the rest


@st.composite
def designs(draw: st.DrawFn) -> tuple[Design, Spec]:
    """Random designs and supplies: split rails of independent size, a single supply with a
    mid-rail or a fixed reference; rail tolerance 1..15 %; slow to fast op amps."""
    u1 = opamp(
        swing_pos_v=draw(st.floats(0.02, 2.0)),
        swing_neg_v=draw(st.floats(0.02, 2.0)),
        slew_v_per_us=draw(st.floats(0.3, 20.0)),
        gbw_hz=draw(st.sampled_from([math.inf, 1e6, 3e6, 1e7])),
        delay_s=draw(st.floats(0.0, 4e-6)),
        offset_v=draw(st.floats(0.0, 5e-3)),
        bias_a=draw(st.floats(0.0, 2e-6)),
    )
    tol = st.sampled_from([0.1, 1.0, 5.0])
    tc = st.floats(-200.0, 200.0)

    def part(code: str) -> Resistor:
        return resistor(code, draw(st.floats(1e3, 1e5)), draw(tol), draw(tc))

    cap = capacitor(draw(st.floats(1e-9, 1e-7)), draw(st.sampled_from([1.0, 2.0, 5.0])), draw(tc))
    design = Design(u1, part("RT-1"), part("RT-2"), part("RT-3"), cap)
    kind = draw(st.sampled_from(["split", "single", "single_ref"]))
    rail_tol = draw(st.floats(1.0, 15.0))
    t_min, t_max = draw(st.floats(-40.0, 25.0)), draw(st.floats(25.0, 125.0))
    if kind == "split":
        v_pos, v_neg = draw(st.floats(6.0, 15.0)), -draw(st.floats(6.0, 15.0))
        return design, make_spec(v_pos, v_neg, rail_tol, t_min, t_max)
    v_pos = draw(st.floats(10.0, 24.0))
    v_ref = v_pos * draw(st.floats(0.4, 0.6)) if kind == "single_ref" else None
    return design, make_spec(v_pos, 0.0, rail_tol, t_min, t_max, v_ref)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(designs())
def test_reported_extremes_bound_a_dense_rail_grid_times_every_corner(
    case: tuple[Design, Spec],
) -> None:
    design, spec = case
    lo, hi = reported(design, spec)
    # Brute force over the model: 25 values of each rail times every corner of the rest.
    grid_lo, grid_hi = brute_force(design, spec, *rail_grid(spec, 25))
    assert np.all(lo <= grid_lo * (1 + 1e-12)), (lo, grid_lo)
    assert np.all(hi >= grid_hi * (1 - 1e-12)), (hi, grid_hi)
    # ... and every reported extreme is the model's value at its reported setting (a point of
    # the box), so the bound is attained, not padded.
    wc = worst_case(design, spec)
    for m, metric in enumerate(METRICS):
        for side, bound in zip(("lo", "hi"), getattr(wc, metric), strict=True):
            z = wc.deviations[f"{metric}_{side}"]
            assert all(-1.0 <= x <= 1.0 for x in z)
            at = model_metrics(design, spec, setting_of(design, spec, wc.variables, z))
            assert at[0, m] == pytest.approx(bound, rel=1e-12), (metric, side)


# --------------------------------------------------------------------------------------------
# box_extremes


def test_box_extremes_is_the_worst_case_bound_for_the_metrics_asked() -> None:
    design, spec = counterexample()
    wc = worst_case(design, spec)
    box = box_extremes(design, spec)
    assert set(box) == set(METRICS)
    for m in METRICS:
        assert box[m] == pytest.approx(getattr(wc, m), rel=1e-12)
    assert list(box_extremes(design, spec, ["duty_high"])) == ["duty_high"]


@pytest.mark.parametrize("metrics", [[], ["frequency"], ["frequency_hz", "period_s"]])
def test_box_extremes_names_a_bad_metric(metrics: list[str]) -> None:
    design, spec = counterexample()
    with pytest.raises(ValueError, match=r"^metrics: expected some of frequency_hz"):
        box_extremes(design, spec, metrics)
    with pytest.raises(TypeError, match=r"^spec: expected"):
        box_extremes(design, "not a spec", ["frequency_hz"])  # type: ignore[arg-type]
