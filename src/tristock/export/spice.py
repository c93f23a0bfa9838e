"""An ngspice netlist of one design: the topology's own netlist (``Topology.netlist``) of the
board built at nominal part values, the spec's nominal rails and 25 °C (or at a worst-case
corner: ``corners``), under a header that says what the models leave out, with ``.meas``
lines for frequency, amplitude and duty.

The op amps are behavioural models from the catalog row (swing headroom, slew, propagation
delay, GBW, offset and bias of each channel); the topology chooses the comparator model it is
held to against ngspice (``spice_accuracy``). A trimmed design is exported at its DESIGN
file's wiper, R3 + wiper·RV1 as one resistor (exact for a rheostat). A tuned design is exported
at one range (its capacitor in place of C1) and one wiper position (``tuned_at``): a series
control as R3 + wiper·RV1; a divider control as the board has it, the pot's track in two
halves (1 - α)·RV1 and α·RV1 from the square node to the end stop R4 at the reference, its
wiper driving R3, the range capacitor at its own value and the integrator's own offset and
bias (the model computes the same loop through its Thévenin equivalent, R3 + R_th and C/β,
``circuits.timing``). The divider's lines replace the topology's timing-resistor line, which
must be present once (else the export is refused); so do the capacitor, offset and bias lines.

Measurements (ngspice ``.meas``): ``per`` (s), ``freq`` = 1/per (Hz), ``duty`` (fraction of
the period high, at the square's mid level), ``vtmax``/``vtmin`` (the triangle's peaks, V to
ground) and ``vtpp`` = vtmax - vtmin (V).
"""

from __future__ import annotations

import dataclasses
from typing import Any

from tristock.circuits.board import AnyBoard, Design, rails_from_supply
from tristock.circuits.rails import OpAmpModel
from tristock.export.corners import CORNERS, corner_oscillator
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec

#: Settled periods measured by the exported transient run.
PERIODS = 4
#: The transient's largest step is at most a period over this (10 ns at 2.5 kHz, the
#: topology's own step), so a slow design keeps a fast one's resolution at a bounded cost.
STEPS_PER_PERIOD = 40_000

LEFT_OUT = (
    "What the models leave out: part tolerances and temperature (one setting of them only);",
    "the op amps' output resistance and current limit, input capacitance, common-mode and",
    "supply rejection, noise, and any second pole; board parasitics and capacitor leakage",
    "and absorption. The comparator and integrator are behavioural models, not a maker's",
    "macromodel: check against the op amp's own model before release.",
)

EXTRA_MEASURES = (
    ".meas tran freq PARAM='1/per'",
    ".meas tran vtpp PARAM='vtmax-vtmin'",
)


def tuned_at(design: Design, range_number: int = 1, dial: float = 0.5) -> Design:
    """A tuned board switched to range ``range_number`` (1 = C1, the lowest) with the pot's
    wiper at ``dial`` (0..1, as the DESIGN file's ``wiper``); SpecError names the field."""
    count = len(design.capacitors)
    if not 1 <= range_number <= count:
        raise SpecError([f"range: this design has ranges 1..{count}, got {range_number}"])
    if not 0.0 <= dial <= 1.0:
        raise SpecError([f"dial: must be 0..1, got {dial}"])
    return dataclasses.replace(design, selected=range_number - 1, wiper=dial)


def _pot_lines(design: Design) -> list[str]:
    """The divider from the square node ``vs`` to the integrator's - input ``inm``: the track
    (1 - α)·RV1 to the wiper ``w``, α·RV1 on to the end stop R4 at the reference, R3 from the
    wiper (a zero-length half is a 0 V source)."""
    assert design.rv1 is not None and design.r4 is not None
    a, rv = design.wiper, design.rv1.value_ohm

    def half(name: str, n1: str, n2: str, ohm: float) -> str:
        return f"R{name} {n1} {n2} {ohm!r}" if ohm > 0 else f"V{name} {n1} {n2} 0"

    return [
        f"* RV1 as a divider (wiper {a:g}): track from the square node to the end stop R4 at",
        "* the reference, its wiper w driving R3",
        half("VT", "vs", "w", (1.0 - a) * rv),
        half("VB", "w", "e", a * rv),
        f"R4 e ref {design.r4.value_ohm!r}",
        f"RT w inm {design.r3.value_ohm!r}",
    ]


def _wire_divider(text: str, design: Design, osc: Any) -> str:
    """The netlist of the equivalent loop with the board's own divider, range capacitor and
    integrator offset and bias put back (module docstring)."""
    real = OpAmpModel.from_part(design.u1)  # the equivalent's are scaled by 1/β
    swaps = {
        f"RT vs inm {osc.r3!r}": "\n".join(_pot_lines(design)),
        f"CT inm vt {osc.c1!r} IC=0": f"CT inm vt {design.timing_capacitor.value_f!r} IC=0",
        f"Vos1 ref1 ref {osc.opamp.offset_v!r}": f"Vos1 ref1 ref {real.offset_v!r}",
        f"Ib1 inm 0 {osc.opamp.bias_a!r}": f"Ib1 inm 0 {real.bias_a!r}",
    }
    lines = text.split("\n")
    for old, new in swaps.items():
        if lines.count(old) != 1:
            raise SpecError(
                [f"parts.RV1: the {design.topology.name} netlist has no line {old.split()[0]} "
                 "to wire the divider into"]
            )  # fmt: skip
        lines[lines.index(old)] = new
    return "\n".join(lines)


def _step_for(line: str, period_s: float) -> str:
    """A ``.tran TSTEP TSTOP 0 TMAX uic`` line with TSTEP and TMAX raised to
    ``period_s / STEPS_PER_PERIOD`` where that is longer (other lines as they are)."""
    words = line.split()
    if len(words) != 6 or words[0] != ".tran":
        return line
    step = max(float(words[1]), period_s / STEPS_PER_PERIOD)
    return " ".join([".tran", repr(step), words[2], words[3], repr(step), words[5]])


def spice_netlist(
    spec: Spec, design: AnyBoard, *, source: str = "", corner: str | None = None
) -> str:
    """The netlist text (see the module docstring); ``source`` names the DESIGN file in the
    header; ``corner`` (fmin, fmax, amin, amax) builds the board at that worst-case extreme
    (fixed and trimmed designs; a tuned design at its range and wiper, ``tuned_at``, at
    nominal values). SpecError: one line naming the field."""
    tuned = spec.tuning is not None
    if tuned and corner is not None:
        raise SpecError(["corner: a tuned design is exported at nominal values (no --corner)"])
    if corner is not None and corner not in CORNERS:
        raise SpecError([f"corner: expected one of {', '.join(CORNERS)}, got {corner!r}"])
    setting = ""
    if corner is None:
        osc = design.oscillator(rails_from_supply(spec.supply))
    elif not isinstance(design, Design) or design.u2 is not None:
        raise SpecError(["corner: corner netlists are built for the op-amp Schmitt loop only"])
    else:
        osc, setting = corner_oscillator(design, spec, corner)
    rails = osc.rails
    text = design.topology.netlist(osc, periods=PERIODS)
    if tuned and isinstance(design, Design) and design.control == "divider":
        text = _wire_divider(text, design, osc)
    body = [_step_for(line, osc.period_s) for line in text.splitlines()]
    end = body.index(".end")
    parts = ", ".join(f"{k} {p.id}" for k, p in design.parts().items())
    header = [
        f"* tristock export spice{f' of {source}' if source else ''}: topology "
        f"{design.topology.name}",
        f"* parts: {parts}",
        f"* rails {rails.v_pos:.6g} V / {rails.v_neg:.6g} V, reference "
        f"{rails.reference_v:.6g} V, "
        + ("25 C, nominal values" if corner is None else f"worst-case corner {corner}:"),
    ]
    if setting:
        header.append(f"*   {setting}")
    if tuned and isinstance(design, Design):
        header.append(
            f"* range {design.selected + 1} of {len(design.capacitors)} "
            f"(C{design.selected + 1} {design.timing_capacitor.id} in place of C1), "
            f"{design.control} control, wiper {design.wiper:g}"
        )
    rv1 = design.rv1 if isinstance(design, Design) else None
    if rv1 is not None and not (tuned and design.control == "divider"):
        header.append(
            f"* RT = R3 + wiper x RV1 = {osc.r3:.6g} ohm (wiper {design.wiper:g} of "
            f"{rv1.value_ohm:g} ohm)"
        )
    header += [f"* {line}" for line in LEFT_OUT]
    p = osc.prediction()
    header.append(
        f"* model prediction: f = {float(p.frequency_hz):.6g} Hz, triangle "
        f"{float(p.amplitude_vpp):.6g} Vpp, duty {float(p.duty_high):.6g}"
    )
    return "\n".join([*header, *body[:end], *EXTRA_MEASURES, *body[end:]]) + "\n"
