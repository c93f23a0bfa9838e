"""ngspice netlist pieces the variant topologies share: the op-amp channels as behavioural
macromodels, and the measurements every oscillator run reports.

The models follow the reference runs (ngspice 39) and ``opamp_schmitt.netlist``:

- the integrator: a VCVS of gain 1e6, or (finite GBW) a single-pole gm stage into an
  integrating node (GBW = GM/(2π·CN), AOL = GM·RN, tanh slew limit SR = IMAX/CN) behind a
  unity buffer; its + input at ref + Vos1, Ib1 drawn from its - pin;
- the comparator: ``"slew"`` (a tanh decision of gain 1e6, a transport delay as a matched
  lossless line started full, a linear slew limiter with separate rise and fall rates) or
  ``"macro"`` (a transport delay ahead of a gm stage with finite GBW and slew, clamped sharply
  at its output levels).

Pitfalls handled (reference/NOTES.md): ``uic`` with IC= on every state; a pole or slew state
in the positive-feedback loop; gain 1e6; a small maximum step; ``method=gear``; the delay
line starts full. Node names: ``ref`` the reference, ``inm`` the integrator's - pin, ``vt``
the triangle, ``p`` the comparator's + input; the comparator drives ``out``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

#: Measurements every run reports: period (s), duty at mid-swing and at the reference
#: crossing (fractions), the triangle's extremes (V to ground).
MEASURES = ("per", "duty", "dutyref", "vtmax", "vtmin")
#: Open-loop gain of the gm-stage macromodels.
AOL = 1e5


@dataclass(frozen=True)
class Channel:
    """One op-amp channel as the netlist models it (V to ground, V/s, s, Hz)."""

    v_high: float
    v_low: float
    slew_rise: float
    slew_fall: float
    delay_s: float = 0.0
    gbw_hz: float = math.inf


def integrator_lines(ch: Channel, v_ref: float, vos1: float, ib1: float) -> list[str]:
    """The integrator's amplifier (output ``vt``), its offset source and bias current."""
    lines = [f"Vos1 ref1 ref {vos1!r}", f"Ib1 inm 0 {ib1!r}"]
    if math.isinf(ch.gbw_hz):
        return [*lines, "E1 vt 0 ref1 inm 1e6"]
    cn = 1e-9
    gm = 2.0 * math.pi * ch.gbw_hz * cn
    if ch.slew_rise == ch.slew_fall and math.isfinite(ch.slew_rise):
        imax = ch.slew_rise * cn
        stage = f"Bg1 0 n1 I = {imax!r}*tanh({gm / imax!r}*(v(ref1)-v(inm)))"
    else:
        stage = f"Bg1 0 n1 I = {gm!r}*(v(ref1)-v(inm))"
    return [
        *lines,
        "* single-pole integrator amplifier (gm stage into CN, AOL = GM*RN), buffered",
        stage,
        f"Cn1 n1 0 {cn!r} IC={v_ref!r}",
        f"Rn1 n1 ref {AOL / gm!r}",
        "E1 vt 0 n1 0 1",
    ]


def comparator_lines(ch: Channel, kind: str, v_ref: float, start_decision: float) -> list[str]:
    """The comparator (output ``out``, starting high), deciding on v(p) - v(ref2) with
    ref2 = ref + Vos2 (the caller adds Vos2 and Ib2). ``start_decision`` is v(p) - v(ref2)
    at the start, which fills the macromodel's delay line."""
    hi, lo = ch.v_high, ch.v_low
    if kind == "slew":
        vmid, vamp = (hi + lo) / 2.0, (hi - lo) / 2.0
        sra = (ch.slew_rise + ch.slew_fall) / 2.0
        srd = (ch.slew_rise - ch.slew_fall) / 2.0
        lines = [f"B2 d 0 V = {vmid!r} + {vamp!r}*tanh(1e6*(v(p)-v(ref2)))"]
        if ch.delay_s > 0.0:
            lines += [
                "* matched lossless line = pure delay, started full at the high level",
                "Ed da 0 d 0 1",
                f"T1 da 0 db 0 Z0=1k TD={ch.delay_s!r} IC={hi!r},{hi / 1e3!r},{hi!r},{-hi / 1e3!r}",
                "Rtl db 0 1k",
            ]
        else:
            lines.append("Ed db 0 d 0 1")
        return [
            *lines,
            "* dx/dt = SR*tanh(u), u = (target - x)/1 mV; SR = rise rate up, fall rate down",
            f"Bsl 0 x I = 1n*({sra!r} + {srd!r}*tanh((v(db)-v(x))/1m))*tanh((v(db)-v(x))/1m)",
            f"Cs x 0 1n IC={hi!r}",
            "E2 out 0 x 0 1",
        ]
    if kind != "macro":
        raise ValueError(f"comparator: {kind!r} is not slew or macro")
    cn = 1e-9
    gm = 2.0 * math.pi * ch.gbw_hz * cn
    imax = ch.slew_rise * cn
    vsc, gcl = 1e-5, 1e3
    clamp = (
        f"{gcl * vsc!r}*(uramp((v(x)-{hi!r})/{vsc!r}) + ln(1+exp(-abs((v(x)-{hi!r})/{vsc!r})))"
        f" - uramp(({lo!r}-v(x))/{vsc!r}) - ln(1+exp(-abs(({lo!r}-v(x))/{vsc!r}))))"
    )
    lines = []
    decision = "(v(p)-v(ref2))"
    if ch.delay_s > 0.0:
        e0 = start_decision
        lines += [
            "* matched lossless line = transport delay of the comparator's input, started full",
            "Ed da 0 p ref2 1",
            f"T1 da 0 db 0 Z0=1k TD={ch.delay_s!r} IC={e0!r},{e0 / 1e3!r},{e0!r},{-e0 / 1e3!r}",
            "Rtl db 0 1k",
        ]
        decision = "v(db)"
    return [
        *lines,
        "* gm stage (SR = IMAX/CN, GBW = GM/(2 pi CN), AOL = GM*RN), sharp clamp at the rails",
        f"Bg 0 x I = {imax!r}*tanh({gm / imax!r}*{decision})",
        f"Cn x 0 {cn!r} IC={hi!r}",
        f"Rn x ref {AOL / gm!r}",
        f"Bcl x 0 I = {clamp}",
        "E2 out 0 x 0 1",
    ]


def run_lines(
    square_node: str, v_mid: float, v_ref: float, period_s: float, periods: int, step_s: float
) -> list[str]:
    """Options, the transient run (start-up skipped for 1.5 periods) and MEASURES on the
    square at ``square_node`` (mid-swing ``v_mid``, V to ground) and the triangle ``vt``."""
    td = 1.5 * period_s
    t_stop = td + (periods + 2.0) * period_s
    sq = f"v({square_node})"
    return [
        ".options reltol=1e-4 method=gear",
        f".tran {step_s!r} {t_stop!r} 0 {step_s!r} uic",
        f".meas tran tr1 WHEN {sq}={v_mid!r} TD={td!r} RISE=1",
        f".meas tran tr2 WHEN {sq}={v_mid!r} TD={td!r} RISE={periods + 1}",
        f".meas tran tf1 WHEN {sq}={v_mid!r} TD={td!r} FALL=1",
        f".meas tran tf2 WHEN {sq}={v_mid!r} TD={td!r} FALL=2",
        f".meas tran per PARAM='(tr2-tr1)/{periods}'",
        ".meas tran duty PARAM='(tf1>tr1 ? tf1-tr1 : tf2-tr1)/per'",
        f".meas tran tz1 WHEN {sq}={v_ref!r} TD={td!r} RISE=1",
        f".meas tran tzf1 WHEN {sq}={v_ref!r} TD={td!r} FALL=1",
        f".meas tran tzf2 WHEN {sq}={v_ref!r} TD={td!r} FALL=2",
        ".meas tran dutyref PARAM='(tzf1>tz1 ? tzf1-tz1 : tzf2-tz1)/per'",
        f".meas tran vtmax MAX v(vt) FROM={td!r} TO={t_stop!r}",
        f".meas tran vtmin MIN v(vt) FROM={td!r} TO={t_stop!r}",
        ".end",
    ]


def gm_integrator_lines(gbw_hz: float, slew_v_per_s: float, aol: float, v_ref: float) -> list[str]:
    """The integrator's amplifier driving node ``vt`` from ``ref1`` - ``inm``: a VCVS of gain
    1e6 (``gbw_hz`` inf), or a single-pole gm stage into an integrating node (GBW = GM/(2 pi
    CN), AOL = GM*RN, optional tanh slew limit SR = IMAX/CN) behind a unity buffer."""
    if math.isinf(gbw_hz):
        return ["E1 vt 0 ref1 inm 1e6"]
    cn = 1e-9
    gm = 2.0 * math.pi * gbw_hz * cn
    rn = aol / gm
    if math.isinf(slew_v_per_s):
        stage = f"Bg1 0 n1 I = {gm!r}*(v(ref1)-v(inm))"
    else:
        imax = slew_v_per_s * cn
        stage = f"Bg1 0 n1 I = {imax!r}*tanh({gm / imax!r}*(v(ref1)-v(inm)))"
    return [
        "* single-pole integrator amplifier (gm stage into CN, AOL = GM*RN), buffered",
        stage,
        f"Cn1 n1 0 {cn!r} IC={v_ref!r}",
        f"Rn1 n1 ref {rn!r}",
        "E1 vt 0 n1 0 1",
    ]
