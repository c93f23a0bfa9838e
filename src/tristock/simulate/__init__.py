"""Time-domain verification of the two-op-amp loop.

This package is the independent check on the closed forms of ``tristock.circuits``: it uses none
of them. It integrates the loop's own equations from a stated start state and measures what a
scope would show. Two engines, chosen by the op amp's gain-bandwidth:

- infinite GBW (``piecewise``): an exact, event-driven piecewise solution, described below;
- finite GBW (``ode``): both channels single-pole amplifiers with a tanh input stage that
  slew-limits at SR, the comparator's delay a transport delay ahead of its stage, integrated
  as an ODE between events (scipy's LSODA, rtol 1e-10); see ``tristock.simulate.ode``.

The piecewise model (volts, seconds, ohms, farads, amperes; node voltages to ground):

- Integrator (U1A), an ideal inverting integrator whose + input sits at ``Vref + Vos1`` and whose
  inverting pin draws the bias current ``Ib1``. Its free-running output rate is

      r(t) = (Vref + Vos1 - vs(t)) / (R3·C1) + Ib1 / C1        (V/s)

  The output is rate-limited to ``[-SR_fall, +SR_rise]`` and clamped to its swing range
  ``[V- + swing_neg, V+ - swing_pos]``: at a limit it stays put while r pushes outward and leaves
  the limit the instant r turns inward. Neither limit keeps a memory (no integrator wind-up):
  a design that needs them fails the slew or swing check anyway; the simulation only has to say
  what such a loop does, not model recovery from saturation.
- Comparator (U1B) decides on the sign of

      g = v(+) - Vref - Vos2,   v(+) = (R2·vt + R1·vs)/(R1 + R2) - Ib2·R1·R2/(R1 + R2)

  (superposition at the + input; ``Ib2`` flows into the pin). A decision reaches the output a
  pure transport delay ``td`` later; the output then moves linearly toward the new level (VOH
  at ``SR_rise``, VOL at ``SR_fall``; infinite slew means a step). VOH = V+ - swing_pos,
  VOL = V- + swing_neg. Decisions that change during the delay are all delivered, in order.

Between events every quantity is a polynomial in time: the square is constant or a ramp, the
integrator rate is constant or linear, so the triangle is linear or quadratic and the comparator
input g is at most quadratic. Each event (decision crossing, delayed output change, end of a
ramp, integrator reaching or leaving a rate or swing limit) is found as an exact root, so the
result has only floating-point error (about 1e-13 relative), no step-size error.

Start state: triangle at the reference, square high (and the delay line full of "high"). The
first max(``settle_periods``, 2) periods (counted between rising mid-swing crossings of the
square) are discarded, and more until two successive periods agree (to 1e-9; 1e-8 on the ODE
path); then ``periods`` periods are measured between rising mid-swing crossings. A loop that
never settles, whose square keeps turning back before mid-swing, or that stops (the triangle
held at a swing limit short of its threshold; on the ODE path, any triangle that reaches the
integrator's swing) raises SimulationError; the work is bounded by an event (step) budget.
"""

from __future__ import annotations

import math

from tristock.circuits import DEFAULT_TOPOLOGY
from tristock.circuits.topology import BuiltCircuit, Topology
from tristock.simulate.loop import MIN_POINTS
from tristock.simulate.ode import measure_ode, run_ode, sample_ode
from tristock.simulate.piecewise import measure_trace, run_piecewise, sample_trace
from tristock.simulate.results import Measured, SimulationError, SimulationResult

__all__ = ["Measured", "SimulationError", "SimulationResult", "simulate"]


def simulate(
    osc: BuiltCircuit,
    *,
    periods: int = 10,
    max_points: int = 4000,
    settle_periods: int = 3,
    topology: Topology = DEFAULT_TOPOLOGY,
) -> SimulationResult:
    """Simulate ``osc`` in the time domain and measure ``periods`` settled periods.

    Frequency = periods / (time between the first and last rising mid-swing crossing of the
    square in the window); duty, peaks, amplitude and square levels as described on
    ``Measured``. Waveforms have at most ``max_points`` samples.

    The loop's parameters come from ``topology.time_domain(osc)``: pass the board's topology
    (``Design.topology``); the default is ``circuits.DEFAULT_TOPOLOGY``, today's circuit.

    Raises ValueError naming the field for bad input, SimulationError (with the numbers) when
    the loop does not oscillate or does not settle.
    """
    for name, value, least in (
        ("periods", periods, 1),
        ("max_points", max_points, MIN_POINTS),
        ("settle_periods", settle_periods, 0),
    ):
        if isinstance(value, bool) or not isinstance(value, int) or value < least:
            raise ValueError(f"{name}: {value!r} must be an integer >= {least}")
    loop = topology.time_domain(osc)
    if math.isfinite(loop.gbw_hz):
        ode = run_ode(loop, periods, settle_periods, loop.time_scale_s())
        measured = measure_ode(loop, ode)
        t_s, triangle, square = sample_ode(loop, ode, max_points)
        rises, window, events = ode.rises, ode.window, ode.steps
    else:
        trace = run_piecewise(loop, periods, settle_periods)
        measured = measure_trace(loop, trace)
        t_s, triangle, square = sample_trace(loop, trace, max_points)
        rises, window, events = trace.rises, trace.window, trace.events
    return SimulationResult(
        measured=measured,
        t_s=t_s,
        triangle_v=triangle,
        square_v=square,
        periods_measured=periods,
        reference_v=loop.v_ref,
        threshold_high_v=loop.trip_level(loop.v_low) - loop.v_ref,
        threshold_low_v=loop.trip_level(loop.v_high) - loop.v_ref,
        settle_time_s=rises[window[0]],
        events=events,
    )
