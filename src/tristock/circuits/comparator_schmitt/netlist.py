"""The ngspice netlist of a comparator-IC loop (``ComparatorCase``: one transient run).

- U1 (integrator): the op-amp macromodel of today's netlists, a single-pole gm stage into an
  integrating node (GBW = GM/(2π·CN), AOL = GM·RN, tanh slew limit SR = IMAX/CN) behind a unity
  buffer; + input at the reference plus Vos1, Ib1 drawn from its - pin; a VCVS of gain 1e6
  when GBW is infinite.
- U2 (comparator), behavioural: a tanh decision of gain 1e6 on v(+) - (ref + Vos2) (Ib2 into
  its + pin) -> a transport delay (a matched lossless line, started full) of delay - τ/2 ->
  a linear edge state x (0 low, 1 high) moving at 1/τr up and 1/τf down (τ = 10-90 % time
  / 0.8, with a 0.1 ‰ soft landing), so 50 % of every step comes ``delay`` after the crossing.
  Push-pull: the square node is VOL + x·(VOH - VOL). Open-drain: R5 from V+ to the square node
  and the output transistor as a conductance g = (1 - x)/(x·Rth) to VOL (Rth = R5 ∥ R3 ∥
  (R1 + R2), the node's own resistance), which makes the node the blend
  x·v_free + (1 - x)·VOL of the pulled-up level (loaded by R3 and R1 + R2) and the low level.

Pitfalls handled (reference/NOTES.md): ``uic`` with IC= on every state; gain 1e6 with a
state in the positive-feedback loop; a small maximum step (a fifth of the shortest edge, at
most 1/20000 of the period); ``method=gear``; the delay line starts full; ``.meas`` values
carry 6 significant digits. Running ngspice is the tests' business.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from tristock.circuits.comparator_schmitt.point import ComparatorOscillator
from tristock.circuits.spicelines import gm_integrator_lines
from tristock.stock.comparators import EDGE_SHARE, edge_start_s

#: Measurements every run reports (absolute voltages, s, fraction).
MEASURES = ("per", "duty", "dutyref", "vtmax", "vtmin", "vsmax", "vsmin")
#: The edge state's floor: the open-drain transistor's conductance stays finite.
X_FLOOR = 1e-7


@dataclass(frozen=True)
class ComparatorCase:
    """One transient run; voltages absolute (V), SI units. ``pull_up`` = R5 (0: push-pull,
    the high level ``v_high``); ``v_mid`` is the square level the .meas lines cross."""

    r1: float
    r2: float
    r3: float
    c1: float
    v_pos: float
    v_ref: float
    v_high: float
    v_low: float
    v_mid: float
    period_guess_s: float
    pull_up: float = 0.0
    delay_s: float = 0.0
    rise_s: float = 0.0
    fall_s: float = 0.0
    integrator_gbw_hz: float = math.inf
    integrator_slew: float = math.inf
    aol: float = 1e5
    vos1: float = 0.0
    ib1: float = 0.0
    vos2: float = 0.0
    ib2: float = 0.0
    periods: int = 4

    def __post_init__(self) -> None:
        if min(self.rise_s, self.fall_s) <= 0.0:
            raise ValueError("rise_s/fall_s: the behavioural comparator needs finite edges")
        if edge_start_s(self.delay_s, max(self.rise_s, self.fall_s)) < 0.0:
            raise ValueError("delay_s: shorter than half an edge")

    @property
    def max_step_s(self) -> float:
        shortest = min(self.rise_s, self.fall_s) / EDGE_SHARE
        return min(shortest / 5.0, self.period_guess_s / 20000.0, 10e-9)


def _integrator_lines(case: ComparatorCase) -> list[str]:
    """U1's integrator amplifier (``spicelines.gm_integrator_lines``)."""
    return gm_integrator_lines(case.integrator_gbw_hz, case.integrator_slew, case.aol, case.v_ref)


def _comparator_lines(case: ComparatorCase) -> list[str]:
    tau_r, tau_f = case.rise_s / EDGE_SHARE, case.fall_s / EDGE_SHARE
    up, down = 1.0 / tau_r, 1.0 / tau_f
    lines = ["* U2: decision (1 = high), transport delay, linear edge state x"]
    lines.append("B2 d 0 V = 0.5 + 0.5*tanh(1e6*(v(p)-v(ref2)))")
    # edges of unequal length start at different times: delay each to its own 50 % point
    start = min(edge_start_s(case.delay_s, case.rise_s), edge_start_s(case.delay_s, case.fall_s))
    if start > 0.0:
        lines += [
            "Ed da 0 d 0 1",
            f"T1 da 0 db 0 Z0=1k TD={start!r} IC=1,1m,1,-1m",
            "Rtl db 0 1k",
        ]
    else:
        lines.append("Ed db 0 d 0 1")
    # the longer edge starts later: a second delay for it (ngspice's B-sources cannot wait)
    extra_r = edge_start_s(case.delay_s, case.rise_s) - start
    extra_f = edge_start_s(case.delay_s, case.fall_s) - start
    target = "v(db)"
    if max(extra_r, extra_f) > 0.0:
        longer = extra_r if extra_r > 0.0 else extra_f
        lines += [
            "Edb dba 0 db 0 1",
            f"T2 dba 0 dc 0 Z0=1k TD={longer!r} IC=1,1m,1,-1m",
            "Rtl2 dc 0 1k",
        ]
        # rising edges wait for the delayed copy when they are the later ones, and vice versa
        target = "min(v(db),v(dc))" if extra_r > 0.0 else "max(v(db),v(dc))"
    u = f"(({target})-v(x))/1e-4"
    lines += [
        f"Bsl 0 x I = 1n*({(up + down) / 2.0!r} + {(up - down) / 2.0!r}*tanh({u}))*tanh({u})",
        "Cs x 0 1n IC=1",
    ]
    if case.pull_up <= 0.0:
        span = case.v_high - case.v_low
        return [*lines, f"Bo vs 0 V = {case.v_low!r} + {span!r}*v(x)"]
    r_th = 1.0 / (1.0 / case.pull_up + 1.0 / case.r3 + 1.0 / (case.r1 + case.r2))
    return [
        *lines,
        "* open drain: R5 pull-up, the transistor a conductance to VOL set by the edge state",
        f"Vpos vpos 0 {case.v_pos!r}",
        f"R5 vpos vs {case.pull_up!r}",
        f"Vol vlo 0 {case.v_low!r}",
        f"Bq vs vlo I = (v(vs)-v(vlo))*(1-v(x))/(max(v(x),{X_FLOOR!r})*{r_th!r})",
    ]


def comparator_netlist(case: ComparatorCase) -> str:
    """The netlist text for ``case``, with .meas lines for MEASURES."""
    t = case.period_guess_s
    td = 1.5 * t
    t_stop = td + (case.periods + 2.0) * t
    n = case.periods
    step = case.max_step_s
    vm = case.v_mid
    lines = [
        "* triangle/square oscillator, comparator-IC Schmitt stage (generated by tristock)",
        f"Vref ref 0 {case.v_ref!r}",
        f"Vos1 ref1 ref {case.vos1!r}",
        f"Ib1 inm 0 {case.ib1!r}",
        f"RT vs inm {case.r3!r}",
        f"CT inm vt {case.c1!r} IC=0",
        *_integrator_lines(case),
        f"Vos2 ref2 ref {case.vos2!r}",
        f"Ib2 p 0 {case.ib2!r}",
        f"RA vt p {case.r1!r}",
        f"RB vs p {case.r2!r}",
        *_comparator_lines(case),
        ".options reltol=1e-4 method=gear",
        f".tran {step!r} {t_stop!r} 0 {step!r} uic",
        f".meas tran tr1 WHEN v(vs)={vm!r} TD={td!r} RISE=1",
        f".meas tran tr2 WHEN v(vs)={vm!r} TD={td!r} RISE={n + 1}",
        f".meas tran tf1 WHEN v(vs)={vm!r} TD={td!r} FALL=1",
        f".meas tran tf2 WHEN v(vs)={vm!r} TD={td!r} FALL=2",
        f".meas tran per PARAM='(tr2-tr1)/{n}'",
        ".meas tran duty PARAM='(tf1>tr1 ? tf1-tr1 : tf2-tr1)/per'",
        f".meas tran tz1 WHEN v(vs)={case.v_ref!r} TD={td!r} RISE=1",
        f".meas tran tzf1 WHEN v(vs)={case.v_ref!r} TD={td!r} FALL=1",
        f".meas tran tzf2 WHEN v(vs)={case.v_ref!r} TD={td!r} FALL=2",
        ".meas tran dutyref PARAM='(tzf1>tz1 ? tzf1-tz1 : tzf2-tz1)/per'",
        f".meas tran vtmax MAX v(vt) FROM={td!r} TO={t_stop!r}",
        f".meas tran vtmin MIN v(vt) FROM={td!r} TO={t_stop!r}",
        f".meas tran vsmax MAX v(vs) FROM={td!r} TO={t_stop!r}",
        f".meas tran vsmin MIN v(vs) FROM={td!r} TO={t_stop!r}",
        ".end",
    ]
    return "\n".join(lines) + "\n"


def case_of(osc: ComparatorOscillator, *, periods: int = 4) -> ComparatorCase:
    """The run of ``osc`` with its own values: levels from the rails and U2, the square's mid
    level between the high level at mid triangle and the low level (as ``predict`` measures
    duty), U1's GBW and slew on the integrator, offsets and bias currents."""
    p = osc.prediction()
    rails, u2, m = osc.rails, osc.comparator, osc.opamp
    ref = rails.reference_v
    v_high = rails.v_pos - (u2.voh_headroom_v or 0.0)
    v_low = rails.v_neg + u2.vol_v
    return ComparatorCase(
        r1=osc.r1, r2=osc.r2, r3=osc.r3, c1=osc.c1,
        v_pos=rails.v_pos, v_ref=ref, v_high=v_high, v_low=v_low,
        v_mid=ref + (float(p.square_high_v) + float(p.square_low_v)) / 2.0,
        period_guess_s=float(p.period_s),
        pull_up=osc.r5 if u2.is_open_drain else 0.0,
        delay_s=u2.delay_s, rise_s=u2.rise_s, fall_s=u2.fall_s,
        integrator_gbw_hz=m.gbw_hz,
        integrator_slew=m.slew_rise_v_per_s if m.slew_rise_v_per_s == m.slew_fall_v_per_s
        else math.inf,
        vos1=m.offset_v, ib1=m.bias_a, vos2=u2.offset_v, ib2=u2.bias_a,
        periods=periods,
    )  # fmt: skip
