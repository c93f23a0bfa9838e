"""JSON-ready reports of one design, shared by the CLI's ``--json`` and the HTTP API."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from tristock.analysis import Distribution, analyse
from tristock.checks import Warning, check
from tristock.circuit import Oscillator, Prediction
from tristock.design import Design, rails_from_supply
from tristock.results import PartOut
from tristock.spec import Spec


def warnings_for(design: Design, spec: Spec) -> list[Warning]:
    """Every design check of ``design`` on the spec's nominal rails (see ``checks``)."""
    osc = design.oscillator(rails_from_supply(spec.supply))
    return check(
        osc,
        capacitor=design.c1,
        resistors={"R1": design.r1, "R2": design.r2, "R3": design.r3},
        opamp_part=design.u1,
    )


def parts_report(design: Design) -> dict[str, PartOut]:
    """Designator -> part as reported (a single-channel U1 counts two pieces)."""
    from tristock.search import part_out

    uses = design.uses()
    return {
        name: part_out(part, uses[part.id] if name == "U1" else 1)
        for name, part in design.parts().items()
    }


def analysis_report(
    spec: Spec,
    design: Design,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> dict[str, Any]:
    """Parts, prediction, worst case, yield, sensitivities, drift, cost and warnings.

    A tuned spec has no frequency target: the board (at its wiper, on its range) is analysed
    against its own nominal frequency with a ±50 % band, as the tuned search reports its
    candidates, so the yield counts the amplitude band only."""
    if spec.tuning is not None:
        from tristock.tuning import proxy_spec_at

        spec = proxy_spec_at(spec, design)
    result = analyse(design, spec, samples=samples, seed=seed, distribution=distribution)
    return {
        "parts": {k: v.model_dump() for k, v in parts_report(design).items()},
        **result.to_dict(),
        "cost": round(design.cost_per_board, 6),
        "bom_lines": design.bom_lines,
        "warnings": [
            {"code": w.code, "severity": w.severity, "message": w.message}
            for w in warnings_for(design, spec)
        ],
    }


def simulation_report(
    spec: Spec, design: Design, *, periods: int = 10, max_points: int = 4000
) -> dict[str, Any]:
    """Measured values and sampled waveforms of the time-domain simulation, with the model's
    prediction beside them: ``predicted`` is the full model; ``predicted_same_physics`` leaves
    out the finite-GBW delay, which the simulation does not model, so it is the like-for-like
    comparison. Raises ``SimulationError`` when the loop does not oscillate."""
    from tristock.simulate import simulate

    osc = design.oscillator(rails_from_supply(spec.supply))
    data = simulate(osc, periods=periods, max_points=max_points).to_dict()
    data["predicted"] = _headline(osc.prediction())
    data["predicted_same_physics"] = _headline(same_physics(osc).prediction())
    return data


def same_physics(osc: Oscillator) -> Oscillator:
    """The oscillator with the comparator's finite-GBW delay removed (what ``simulate`` models)."""
    return dataclasses.replace(osc, opamp=dataclasses.replace(osc.opamp, gbw_hz=math.inf))


def _headline(p: Prediction) -> dict[str, float]:
    return {
        "frequency_hz": float(p.frequency_hz),
        "amplitude_vpp": float(p.amplitude_vpp),
        "duty_high": float(p.duty_high),
    }
