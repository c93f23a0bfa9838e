"""The ngspice netlist of an op-amp Schmitt loop (``SimCase``: one transient run).

The netlists follow the reference runs (ngspice 39): the integrator's + input sits at the
reference plus Vos1, a bias current source on its - pin; the comparator is one of

- ``"ideal"``: a tanh decision of gain 1e6 with a 1 ns output pole,
- ``"slew"``: the tanh decision, a transport delay (matched lossless line, started full) and
  a linear slew limiter with separate rise and fall rates,
- ``"macro"``: an op-amp macromodel, a current-limited gm stage (tanh) into an integrating
  node (finite GBW, slew SR = IMAX/CN, open-loop gain AOL) with a sharp clamp at the square's
  levels, and (``delay_s`` > 0) a transport delay (matched line) ahead of the gm stage.

The integrator is a VCVS of gain 1e6, or (finite ``integrator_gbw_hz``) the same gm-stage
macromodel with a unity buffer.

Pitfalls handled (reference/NOTES.md): ``uic`` with IC= on every state; a pole or slew state
in the positive-feedback loop; gain 1e6; a small maximum step; ``method=gear``; the delay
line starts full; ngspice always runs under a subprocess timeout; ``.meas`` values carry 6
significant digits.

Running ngspice is the tests' business (``tests/ngspice_harness.py``); this module only
writes the text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

from tristock.circuits.opamp_schmitt.physics import Oscillator
from tristock.circuits.rails import square_levels
from tristock.circuits.spicelines import gm_integrator_lines

Comparator = Literal["ideal", "slew", "macro"]

#: Measurements every run reports (see ``netlist``).
MEASURES = ("per", "duty", "dutyref", "vtmax", "vtmin")


@dataclass(frozen=True)
class SimCase:
    """One transient run. Square levels ``v_high``/``v_low`` and ``v_ref`` are absolute (V).

    ``period_guess_s`` sizes the run: start-up is skipped for 1.5 guesses, then ``periods``
    periods are measured. Ohm, farad, V, V/s, s, Hz, A.
    """

    r1: float
    r2: float
    r3: float
    c1: float
    v_high: float
    v_low: float
    period_guess_s: float
    v_ref: float = 0.0
    comparator: Comparator = "ideal"
    delay_s: float = 0.0
    slew_rise: float = math.inf
    slew_fall: float = math.inf
    gbw_hz: float = math.inf
    aol: float = 1e5
    vos1: float = 0.0
    ib1: float = 0.0
    vos2: float = 0.0
    ib2: float = 0.0
    periods: int = 4
    max_step_s: float = 10e-9
    integrator_gbw_hz: float = math.inf
    integrator_slew: float = math.inf

    def __post_init__(self) -> None:
        if self.comparator == "slew" and not (
            math.isfinite(self.slew_rise) and math.isfinite(self.slew_fall)
        ):
            raise ValueError("slew_rise/slew_fall: the slew comparator needs finite slew rates")
        if self.comparator == "macro" and not (
            math.isfinite(self.gbw_hz) and self.slew_rise == self.slew_fall
        ):
            raise ValueError("gbw_hz: the macromodel needs a finite GBW and one slew rate")
        if not self.v_low < self.v_ref < self.v_high:
            raise ValueError("v_ref: must lie between v_low and v_high")


def case_from(osc: Oscillator, comparator: str, **extra: Any) -> SimCase:
    """A SimCase with the oscillator's own values, rails and op-amp model (square levels from
    its swing headroom, delay, slew, GBW, offsets and bias); the part's GBW goes to both
    channels, as in ``Oscillator`` (the integrator's stage slew-limits at the part's slew rate
    when rise and fall are equal, else it is linear); ``extra`` sets any other field."""
    vh, vl = square_levels(osc.rails, osc.opamp)
    ref = osc.rails.reference_v
    m = osc.opamp
    rise_equals_fall = m.slew_rise_v_per_s == m.slew_fall_v_per_s
    fields: dict[str, Any] = {
        "r1": osc.r1,
        "r2": osc.r2,
        "r3": osc.r3,
        "c1": osc.c1,
        "v_high": ref + vh,
        "v_low": ref - vl,
        "v_ref": ref,
        "period_guess_s": osc.period_s,
        "comparator": comparator,
        "delay_s": m.delay_s,
        "slew_rise": m.slew_rise_v_per_s,
        "slew_fall": m.slew_fall_v_per_s,
        "gbw_hz": m.gbw_hz,
        "vos1": m.offset_v,
        "ib1": m.bias_a,
        "vos2": m.comparator_offset_v,
        "ib2": m.comparator_bias_a,
        "integrator_gbw_hz": m.gbw_hz,
        "integrator_slew": m.slew_rise_v_per_s if rise_equals_fall else math.inf,
    }
    return SimCase(**{**fields, **extra})


def _comparator_lines(case: SimCase, vmid: float, vamp: float) -> list[str]:
    decision = f"B2 d 0 V = {vmid!r} + {vamp!r}*tanh(1e6*(v(p)-v(ref2)))"
    if case.comparator == "ideal":
        return [
            decision.replace("B2 d", "B2 c"),
            "* 1 ns output pole: breaks the algebraic positive-feedback loop; IC sets the start",
            "Ro c x 1k",
            f"Co x 0 1p IC={case.v_high!r}",
            "E2 vs 0 x 0 1",
        ]
    if case.comparator == "slew":
        sra = (case.slew_rise + case.slew_fall) / 2.0
        srd = (case.slew_rise - case.slew_fall) / 2.0
        lines = [decision]
        if case.delay_s > 0.0:
            vh = case.v_high
            lines += [
                "* matched lossless line = pure delay, started full at the high level",
                "Ed da 0 d 0 1",
                f"T1 da 0 db 0 Z0=1k TD={case.delay_s!r} "
                f"IC={vh!r},{vh / 1e3!r},{vh!r},{-vh / 1e3!r}",
                "Rtl db 0 1k",
            ]
        else:
            lines.append("Ed db 0 d 0 1")
        lines += [
            "* dx/dt = SR*tanh(u), u = (target - x)/1 mV; SR = rise rate up, fall rate down",
            f"Bsl 0 x I = 1n*({sra!r} + {srd!r}*tanh((v(db)-v(x))/1m))*tanh((v(db)-v(x))/1m)",
            f"Cs x 0 1n IC={case.v_high!r}",
            "E2 vs 0 x 0 1",
        ]
        return lines
    cn = 1e-9
    gm = 2.0 * math.pi * case.gbw_hz * cn
    imax = case.slew_rise * cn
    rn = case.aol / gm
    # clamp: softplus with a 10 µV knee and 1 kS beyond it; a wider knee (1 mV) lets the output
    # sag ~10 mV off its level before each edge, which starts the regeneration early (about
    # 8e-4 of the period for the demo's op amp) and is not in the model's hard clamp
    vsc, gcl = 1e-5, 1e3
    hi, lo = case.v_high, case.v_low
    clamp = (
        f"{gcl * vsc!r}*(uramp((v(x)-{hi!r})/{vsc!r}) + ln(1+exp(-abs((v(x)-{hi!r})/{vsc!r})))"
        f" - uramp(({lo!r}-v(x))/{vsc!r}) - ln(1+exp(-abs(({lo!r}-v(x))/{vsc!r}))))"
    )
    lines = []
    if case.delay_s > 0.0:
        e0 = case.r1 / (case.r1 + case.r2) * (hi - case.v_ref)
        lines += [
            "* matched lossless line = transport delay of the comparator's input, started full",
            "Ed da 0 p ref2 1",
            f"T1 da 0 db 0 Z0=1k TD={case.delay_s!r} IC={e0!r},{e0 / 1e3!r},{e0!r},{-e0 / 1e3!r}",
            "Rtl db 0 1k",
        ]
        decision = "v(db)"
    else:
        decision = "(v(p)-v(ref2))"
    return [
        *lines,
        "* gm stage (SR = IMAX/CN, GBW = GM/(2 pi CN), AOL = GM*RN), sharp clamp at the rails",
        f"Bg 0 x I = {imax!r}*tanh({gm / imax!r}*{decision})",
        f"Cn x 0 {cn!r} IC={hi!r}",
        f"Rn x ref {rn!r}",
        f"Bcl x 0 I = {clamp}",
        "E2 vs 0 x 0 1",
    ]


def _integrator_lines(case: SimCase) -> list[str]:
    """U1's integrator amplifier (``spicelines.gm_integrator_lines``)."""
    return gm_integrator_lines(case.integrator_gbw_hz, case.integrator_slew, case.aol, case.v_ref)


def netlist(case: SimCase) -> str:
    """The netlist text for ``case``, with .meas lines for MEASURES (absolute voltages)."""
    vmid = (case.v_high + case.v_low) / 2.0
    vamp = (case.v_high - case.v_low) / 2.0
    t = case.period_guess_s
    td = 1.5 * t
    t_stop = td + (case.periods + 2.0) * t
    n = case.periods
    lines = [
        f"* triangle/square oscillator, {case.comparator} comparator (generated by tristock)",
        f"Vref ref 0 {case.v_ref!r}",
        "* A1: inverting integrator, VCVS gain 1e6; + input at ref + VOS1; IB1 into its - pin",
        f"Vos1 ref1 ref {case.vos1!r}",
        f"Ib1 inm 0 {case.ib1!r}",
        f"RT vs inm {case.r3!r}",
        f"CT inm vt {case.c1!r} IC=0",
        *_integrator_lines(case),
        "* A2: non-inverting Schmitt trigger; - input at ref + VOS2; IB2 into its + pin",
        f"Vos2 ref2 ref {case.vos2!r}",
        f"Ib2 p 0 {case.ib2!r}",
        f"RA vt p {case.r1!r}",
        f"RB vs p {case.r2!r}",
        *_comparator_lines(case, vmid, vamp),
        ".options reltol=1e-4 method=gear",
        f".tran {case.max_step_s!r} {t_stop!r} 0 {case.max_step_s!r} uic",
        f".meas tran tr1 WHEN v(vs)={vmid!r} TD={td!r} RISE=1",
        f".meas tran tr2 WHEN v(vs)={vmid!r} TD={td!r} RISE={n + 1}",
        f".meas tran tf1 WHEN v(vs)={vmid!r} TD={td!r} FALL=1",
        f".meas tran tf2 WHEN v(vs)={vmid!r} TD={td!r} FALL=2",
        f".meas tran per PARAM='(tr2-tr1)/{n}'",
        ".meas tran duty PARAM='(tf1>tr1 ? tf1-tr1 : tf2-tr1)/per'",
        f".meas tran tz1 WHEN v(vs)={case.v_ref!r} TD={td!r} RISE=1",
        f".meas tran tzf1 WHEN v(vs)={case.v_ref!r} TD={td!r} FALL=1",
        f".meas tran tzf2 WHEN v(vs)={case.v_ref!r} TD={td!r} FALL=2",
        ".meas tran dutyref PARAM='(tzf1>tz1 ? tzf1-tz1 : tzf2-tz1)/per'",
        f".meas tran vtmax MAX v(vt) FROM={td!r} TO={t_stop!r}",
        f".meas tran vtmin MIN v(vt) FROM={td!r} TO={t_stop!r}",
        ".end",
    ]
    return "\n".join(lines) + "\n"
