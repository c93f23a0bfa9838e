"""JSON-ready reports of one design, shared by the CLI's ``--json`` and the HTTP API."""

from __future__ import annotations

from typing import Any

from tristock.analysis.bundle import analyse
from tristock.analysis.montecarlo import Distribution
from tristock.circuits.board import AnyBoard, Design, rails_from_supply
from tristock.circuits.checks import DoesNotOscillate
from tristock.circuits.opamp_schmitt.checks import oscillation_failure
from tristock.circuits.topology import Prediction
from tristock.designs.candidate import parts_report, warnings_for
from tristock.simulate.results import Measured, SimulationResult
from tristock.spec.model import Spec


def analysis_report(
    spec: Spec,
    design: AnyBoard,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> dict[str, Any]:
    """Parts, prediction, worst case, yield, sensitivities, drift, cost and warnings.

    A tuned spec has no frequency target: the board (at its wiper, on its range) is analysed
    against its own nominal frequency with a ±50 % band, as the tuned search reports its
    candidates, so the yield counts the amplitude band only.

    Raises DoesNotOscillate (a ValueError) for a loop that cannot oscillate on the spec's
    rails, or that oscillates at nominal but fails within the steps and spread the analysis
    takes (a board at the very edge): its figures would describe nothing."""
    require_oscillation(spec, design)
    if spec.tuning is not None:
        from tristock.designs.tuned import proxy_spec_at

        assert isinstance(design, Design)  # a tuned board is an op-amp Schmitt board
        spec = proxy_spec_at(spec, design)
    try:
        result = analyse(design, spec, samples=samples, seed=seed, distribution=distribution)
    except DoesNotOscillate:
        raise
    except ValueError as err:  # oscillates at nominal, but not everywhere the analysis looks
        raise DoesNotOscillate(
            f"the loop oscillates at nominal but not across its spread ({err}); "
            "it sits at the edge of oscillating"
        ) from None
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


def require_oscillation(spec: Spec, design: AnyBoard, *, corners: bool = True) -> None:
    """Raise DoesNotOscillate, saying why, when ``design`` cannot oscillate on the spec's
    nominal rails or (with ``corners``) at either rail corner, 1 ± supply tolerance: its
    output cannot swing past the reference, an error voltage reaches a square level, or a
    threshold lies beyond the integrator's swing."""
    t = spec.supply.tolerance_pct / 100 if corners else 0.0
    for scale, where in ((1.0, ""), (1 - t, "low"), (1 + t, "high")):
        if where and t == 0:
            continue
        rails = rails_from_supply(spec.supply, scale)
        try:
            reason = oscillation_failure(design.oscillator(rails))
        except ValueError as err:  # the circuit refuses to build: square levels, error voltage
            reason = f"the loop cannot oscillate: {err}"
        if reason is not None:
            corner = (
                f" (at the {where} supply corner, rails {rails.v_pos:.4g}/{rails.v_neg:.4g} V)"
                if where
                else ""
            )
            raise DoesNotOscillate(reason + corner)


def simulation_report(
    spec: Spec, design: AnyBoard, *, periods: int = 10, max_points: int = 4000
) -> dict[str, Any]:
    """The time-domain simulation of the board (nominal rails, 25 °C) with the full model's
    prediction beside it (the one ``analyse`` reports) and their difference; see
    ``simulation_report_of``. Raises ``SimulationError`` when the loop does not oscillate."""
    from tristock.simulate import simulate

    osc = design.oscillator(rails_from_supply(spec.supply))
    result = simulate(osc, periods=periods, max_points=max_points, topology=design.topology)
    return simulation_report_of(result, osc.prediction())


def simulation_report_of(result: SimulationResult, predicted: Prediction) -> dict[str, Any]:
    """Measured values and sampled waveforms (``SimulationResult.to_dict``), plus
    ``predicted`` (frequency, amplitude, duty and timing share of the full model: delay, slew
    and both channels' GBW, as the simulation) and ``difference`` (``headline_difference``)."""
    data = result.to_dict()
    data["predicted"] = {
        "frequency_hz": float(predicted.frequency_hz),
        "amplitude_vpp": float(predicted.amplitude_vpp),
        "duty_high": float(predicted.duty_high),
        "timing_share": float(predicted.timing_share),
    }
    data["difference"] = headline_difference(result.measured, predicted)
    return data


def headline_difference(measured: Measured, predicted: Prediction) -> dict[str, float]:
    """The simulation against the full model: ``frequency_rel`` and ``amplitude_rel`` are
    simulated/predicted - 1, ``duty_abs`` is simulated - predicted (fraction of the period)."""
    return {
        "frequency_rel": measured.frequency_hz / float(predicted.frequency_hz) - 1.0,
        "amplitude_rel": measured.amplitude_vpp / float(predicted.amplitude_vpp) - 1.0,
        "duty_abs": measured.duty_high - float(predicted.duty_high),
    }
