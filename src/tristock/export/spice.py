"""An ngspice netlist of one design: the topology's own netlist (``Topology.netlist``) of the
board built at nominal part values, the spec's nominal rails and 25 °C (or at a worst-case
corner: ``corners``), under a header that says what the models leave out, with ``.meas``
lines for frequency, amplitude and duty.

The op amps are behavioural models from the catalog row (swing headroom, slew, propagation
delay, GBW, offset and bias of each channel); the topology chooses the comparator model it is
held to against ngspice (``spice_accuracy``). A trimmed design is exported at its DESIGN
file's wiper, R3 + wiper·RV1 as one resistor (exact for a rheostat). Tuned designs are not
exported (their divider control has no one-resistor equivalent in the loop).

Measurements (ngspice ``.meas``): ``per`` (s), ``freq`` = 1/per (Hz), ``duty`` (fraction of
the period high, at the square's mid level), ``vtmax``/``vtmin`` (the triangle's peaks, V to
ground) and ``vtpp`` = vtmax - vtmin (V).
"""

from __future__ import annotations

from tristock.circuits.board import Design, rails_from_supply
from tristock.export.corners import CORNERS, corner_oscillator
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec

#: Settled periods measured by the exported transient run.
PERIODS = 4

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


def spice_netlist(
    spec: Spec, design: Design, *, source: str = "", corner: str | None = None
) -> str:
    """The netlist text (see the module docstring); ``source`` names the DESIGN file in the
    header; ``corner`` (fmin, fmax, amin, amax) builds the board at that worst-case extreme.
    Tuned designs raise SpecError (one line naming the field)."""
    if spec.tuning is not None:
        raise SpecError(
            ["spec.tuning: tuned designs are not exported to SPICE yet (fixed and trimmed are)"]
        )
    if corner is not None and corner not in CORNERS:
        raise SpecError([f"corner: expected one of {', '.join(CORNERS)}, got {corner!r}"])
    setting = ""
    if corner is None:
        osc = design.oscillator(rails_from_supply(spec.supply))
    else:
        osc, setting = corner_oscillator(design, spec, corner)
    rails = osc.rails
    body = design.topology.netlist(osc, periods=PERIODS).splitlines()
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
    if design.rv1 is not None:
        header.append(
            f"* RT = R3 + wiper x RV1 = {osc.r3:.6g} ohm (wiper {design.wiper:g} of "
            f"{design.rv1.value_ohm:g} ohm)"
        )
    header += [f"* {line}" for line in LEFT_OUT]
    p = osc.prediction()
    header.append(
        f"* model prediction: f = {float(p.frequency_hz):.6g} Hz, triangle "
        f"{float(p.amplitude_vpp):.6g} Vpp, duty {float(p.duty_high):.6g}"
    )
    return "\n".join([*header, *body[:end], *EXTRA_MEASURES, *body[end:]]) + "\n"
