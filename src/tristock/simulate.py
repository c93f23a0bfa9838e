"""Time-domain verification of the two-op-amp loop: an exact, event-driven piecewise simulation.

This module is the independent check on the closed forms of ``tristock.circuit``: it uses none of
them. It integrates the loop's own equations from a stated start state and measures what a
scope would show.

The model (volts, seconds, ohms, farads, amperes; node voltages to ground):

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
- The comparator's finite gain-bandwidth is *not* simulated: the only simple time-domain form of
  it (an extra delay) is the closed form's own estimate, so using it here would check the
  closed form against itself. Compare with ``circuit.predict(..., gbw=inf)``.

Between events every quantity is a polynomial in time: the square is constant or a ramp, the
integrator rate is constant or linear, so the triangle is linear or quadratic and the comparator
input g is at most quadratic. Each event (decision crossing, delayed output change, end of a
ramp, integrator reaching or leaving a rate or swing limit) is found as an exact root, so the
result has only floating-point error (about 1e-13 relative), no step-size error.

Start state: triangle at the reference, square high (and the delay line full of "high"). The
first max(``settle_periods``, 2) periods (counted between rising mid-swing crossings of the
square) are discarded, and more until two successive periods agree to 1e-9; then ``periods``
periods are measured between rising mid-swing crossings. A loop that never settles, whose square
keeps turning back before mid-swing, or that stops (the triangle held at a swing limit short of
its threshold) raises SimulationError; the work is bounded by an event budget.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass
from typing import Any, Literal, NamedTuple

import numpy as np

from tristock.circuit import Oscillator
from tristock.units import format_value

#: Successive periods must agree to this relative difference before measuring.
SETTLE_TOLERANCE = 1e-9
#: Periods allowed beyond ``settle_periods`` for the loop to settle before giving up.
MAX_EXTRA_SETTLE_PERIODS = 100
#: Event budget per simulated period (a healthy loop needs about ten).
EVENTS_PER_PERIOD = 200
#: Transitions that may turn back before mid-swing in a row before the loop is declared broken.
MAX_UNFINISHED_TRANSITIONS = 8
#: Fewest waveform samples accepted for ``max_points``.
MIN_POINTS = 16


class SimulationError(RuntimeError):
    """The loop does not oscillate (or does not settle) in the time-domain model."""


@dataclass(frozen=True, slots=True)
class Measured:
    """What the simulation measured over the measured window.

    Voltages are relative to the reference node (like ``circuit.Prediction``), signed:
    ``peak_low_v`` and ``square_low_v`` are negative for a loop centred on its reference.
    ``duty_high`` is the fraction of the period the square spends at or above its mid-swing
    level (VOH + VOL)/2; ``amplitude_vpp`` is the triangle's true peak-to-peak, overshoot
    included; ``offset_v`` the triangle midpoint (peak_high + peak_low)/2.
    """

    frequency_hz: float
    amplitude_vpp: float
    duty_high: float
    offset_v: float
    peak_high_v: float
    peak_low_v: float
    square_high_v: float
    square_low_v: float

    @property
    def period_s(self) -> float:
        return 1.0 / self.frequency_hz

    def to_dict(self) -> dict[str, float]:
        return {
            "frequency_hz": self.frequency_hz,
            "period_s": self.period_s,
            "amplitude_vpp": self.amplitude_vpp,
            "duty_high": self.duty_high,
            "offset_v": self.offset_v,
            "peak_high_v": self.peak_high_v,
            "peak_low_v": self.peak_low_v,
            "square_high_v": self.square_high_v,
            "square_low_v": self.square_low_v,
        }


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """A finished simulation.

    ``t_s`` is time from the start of the measured window (s), non-decreasing; a time appears
    twice where the square steps (infinite slew), once with each value. ``triangle_v`` and
    ``square_v`` are node voltages to ground (V), exact samples of the piecewise solution, with
    every corner of the waveform included while ``max_points`` allows. ``threshold_high_v`` and
    ``threshold_low_v`` are the triangle levels at which the comparator flips with the square
    settled low and high respectively, relative to the reference; ``reference_v`` is the
    reference node to ground. ``events`` counts the simulation's events, start-up included.
    """

    measured: Measured
    t_s: np.ndarray
    triangle_v: np.ndarray
    square_v: np.ndarray
    periods_measured: int
    reference_v: float
    threshold_high_v: float
    threshold_low_v: float
    settle_time_s: float
    events: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: floats, ints and lists of floats only."""
        return {
            "measured": self.measured.to_dict(),
            "periods_measured": self.periods_measured,
            "reference_v": self.reference_v,
            "threshold_high_v": self.threshold_high_v,
            "threshold_low_v": self.threshold_low_v,
            "settle_time_s": self.settle_time_s,
            "events": self.events,
            "t_s": self.t_s.tolist(),
            "triangle_v": self.triangle_v.tolist(),
            "square_v": self.square_v.tolist(),
        }


@dataclass(frozen=True, slots=True)
class _Loop:
    """The loop's parameters, flattened; all voltages to ground."""

    r1: float
    r2: float
    r3: float
    c1: float
    v_ref: float
    v_high: float  # VOH, also the integrator's upper output limit
    v_low: float  # VOL, also the integrator's lower output limit
    slew_rise: float
    slew_fall: float
    delay: float
    vos1: float
    ib1: float
    vos2: float
    ib2: float

    @property
    def v_mid(self) -> float:
        return 0.5 * (self.v_high + self.v_low)

    @property
    def tolerance_v(self) -> float:
        """Voltage below which two levels count as equal (rounding only)."""
        return 1e-12 * max(1.0, abs(self.v_high), abs(self.v_low), self.v_high - self.v_low)

    def rate(self, vs: float) -> float:
        """Free-running integrator output rate (V/s) with the square at ``vs``."""
        return (self.v_ref + self.vos1 - vs) / (self.r3 * self.c1) + self.ib1 / self.c1

    def comparator_terms(self) -> tuple[float, float, float]:
        """(a, b, c) with g = a·vt + b·vs + c, the comparator's decision voltage (V)."""
        total = self.r1 + self.r2
        drop = self.ib2 * self.r1 * self.r2 / total
        return self.r2 / total, self.r1 / total, -drop - self.v_ref - self.vos2

    def trip_level(self, vs: float) -> float:
        """Triangle voltage (to ground) at which the comparator flips with the square at ``vs``."""
        a, b, c = self.comparator_terms()
        return -(b * vs + c) / a


class _Segment(NamedTuple):
    """One polynomial piece: vt = a0 + a1·u + a2·u², vs = b0 + b1·u, u = t - t0, t0 <= t <= t1."""

    t0: float
    t1: float
    a0: float
    a1: float
    a2: float
    b0: float
    b1: float


@dataclass
class _Trace:
    segments: list[_Segment]
    rises: list[float]
    falls: list[float]
    window: tuple[int, int]  # indices into rises
    events: int


def _check_positive(name: str, value: float, *, allow_inf: bool = False) -> float:
    v = float(value)
    if math.isnan(v) or v <= 0 or (math.isinf(v) and not allow_inf):
        kind = "a positive number" if allow_inf else "a positive finite number"
        raise ValueError(f"{name}: {value!r} must be {kind}")
    return v


def _check_finite(name: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{name}: {value!r} must be a finite number")
    return v


def _loop_from(osc: Oscillator) -> _Loop:
    amp = osc.opamp
    rails = osc.rails
    v_ref = _check_finite("rails.reference_v", rails.reference_v)
    v_high = _check_finite("rails.v_pos", rails.v_pos) - _check_finite(
        "opamp.swing_pos_v", amp.swing_pos_v
    )
    v_low = _check_finite("rails.v_neg", rails.v_neg) + _check_finite(
        "opamp.swing_neg_v", amp.swing_neg_v
    )
    if not v_high > v_low:
        raise ValueError(
            f"opamp.swing_pos_v/swing_neg_v: output range {v_low:g} V to {v_high:g} V is empty "
            f"on rails {rails.v_neg:g} V / {rails.v_pos:g} V"
        )
    delay = _check_finite("opamp.delay_s", amp.delay_s)
    if delay < 0:
        raise ValueError(f"opamp.delay_s: {amp.delay_s!r} must not be negative")
    return _Loop(
        r1=_check_positive("r1", osc.r1),
        r2=_check_positive("r2", osc.r2),
        r3=_check_positive("r3", osc.r3),
        c1=_check_positive("c1", osc.c1),
        v_ref=v_ref,
        v_high=v_high,
        v_low=v_low,
        slew_rise=_check_positive("opamp.slew_rise_v_per_s", amp.slew_rise_v_per_s, allow_inf=True),
        slew_fall=_check_positive("opamp.slew_fall_v_per_s", amp.slew_fall_v_per_s, allow_inf=True),
        delay=delay,
        vos1=_check_finite("opamp.offset_v", amp.offset_v),
        ib1=_check_finite("opamp.bias_a", amp.bias_a),
        vos2=_check_finite("opamp.comparator_offset_v", amp.comparator_offset_v),
        ib2=_check_finite("opamp.comparator_bias_a", amp.comparator_bias_a),
    )


def _first_fall_below(c0: float, c1: float, c2: float, tol: float, slope_tol: float) -> float:
    """Earliest u >= 0 at which p(u) = c0 + c1·u + c2·u² goes below zero (inf if never).

    A p within ``tol`` of zero at u = 0 is taken as exactly zero, and a slope within
    ``slope_tol`` as zero: p then falls now if it heads down, else at its return -c1/c2. Such
    rounding-level values occur right after every event; treating them exactly keeps the event
    loop from taking steps of zero length. Tangent touches (double roots) are not crossings.
    """
    if c0 < -tol:
        return 0.0
    if abs(c0) <= tol:
        if c1 < -slope_tol or (abs(c1) <= slope_tol and c2 < 0):
            return 0.0
        if c1 > slope_tol and c2 < 0:
            return -c1 / c2
        return math.inf
    if c2 == 0:
        return -c0 / c1 if c1 < 0 else math.inf
    disc = c1 * c1 - 4.0 * c2 * c0
    if disc <= 0:
        return math.inf
    q = -0.5 * (c1 + math.copysign(math.sqrt(disc), c1))
    roots = [q / c2] + ([c0 / q] if q != 0 else [])
    falling = [u for u in roots if u > 0 and c1 + 2.0 * c2 * u < 0]
    return min(falling, default=math.inf)


def _integrator_piece(
    loop: _Loop, vt: float, vs: float, slope_vs: float
) -> tuple[float, float, float]:
    """The integrator's motion from now: (a1, a2, u_end) with vt(u) = vt + a1·u + a2·u², valid
    until its mode (free, rate-limited, at a swing limit) changes at u_end (may be inf)."""
    r0 = loop.rate(vs)
    r1 = -slope_vs / (loop.r3 * loop.c1)
    up, down = loop.slew_rise, loop.slew_fall
    tol = loop.tolerance_v
    rate_tol = tol / (loop.r3 * loop.c1)

    def heading_up(x0: float, x1: float) -> bool:
        """x0 + x1·u is, or is about to be, positive (rates within rounding count as zero)."""
        return x0 > rate_tol or (abs(x0) <= rate_tol and x1 > 0)

    def until_zero(x0: float, x1: float) -> float:
        """Time for x0 + x1·u (now >= 0 and heading up) to fall back to zero."""
        return max(0.0, -x0 / x1) if x1 < 0 else math.inf

    if vt >= loop.v_high - tol and heading_up(r0, r1):
        return 0.0, 0.0, until_zero(r0, r1)
    if vt <= loop.v_low + tol and heading_up(-r0, -r1):
        return 0.0, 0.0, until_zero(-r0, -r1)
    if heading_up(r0 - up, r1):
        return up, 0.0, min(until_zero(r0 - up, r1), (loop.v_high - vt) / up)
    if heading_up(-down - r0, -r1):
        return -down, 0.0, min(until_zero(-down - r0, -r1), (vt - loop.v_low) / down)
    a2 = 0.5 * r1
    ends = [
        _first_fall_below(loop.v_high - vt, -r0, -a2, tol, rate_tol),
        _first_fall_below(vt - loop.v_low, r0, a2, tol, rate_tol),
    ]
    if r1 > 0 and math.isfinite(up):
        ends.append((up - r0) / r1)
    if r1 < 0 and math.isfinite(down):
        ends.append((-down - r0) / r1)
    return r0, a2, min(ends)


def _stuck_message(loop: _Loop, t: float, vt: float, vs: float) -> str:
    """Why the loop stopped: the triangle is held at a swing limit short of a threshold beyond
    it, or the integrator runs away from the threshold (its error voltage beats the swing)."""
    trip = loop.trip_level(vs)
    rate = loop.rate(vs)
    state = "high" if vs >= loop.v_mid else "low"
    where = (
        f"at t = {format_value(t, 's', 4)} the square is {state} ({vs:.4g} V) and the comparator "
        f"flips only when the triangle reaches {trip:.4g} V"
    )
    if rate != 0 and (rate > 0) == (trip > vt):
        side = "upper" if rate > 0 else "lower"
        return (
            f"the loop does not oscillate: {where}, but the integrator output stops at its "
            f"{side} swing limit {vt:.4g} V (output range {loop.v_low:.4g} V to "
            f"{loop.v_high:.4g} V): the thresholds lie beyond the integrator's swing. Reduce "
            f"R1/R2 (now {loop.r1 / loop.r2:.4g}) or widen the swing."
        )
    return (
        f"the loop does not oscillate: {where}, but the triangle sits at {vt:.4g} V with the "
        f"integrator driven at {rate:.4g} V/s, away from that level: its error voltage "
        f"Vos1 + Ib1·R3 = {loop.vos1 + loop.ib1 * loop.r3:.4g} V lies outside the square's "
        f"swing about the reference ({loop.v_low - loop.v_ref:.4g} V to "
        f"{loop.v_high - loop.v_ref:.4g} V)."
    )


def _slew_text(rate: float) -> str:
    return "infinite" if math.isinf(rate) else format_value(rate, "V/s", 3)


def _unfinished_message(loop: _Loop, t: float, turns: list[float]) -> str:
    distinct = sorted({f"{v:.4g} V" for v in turns})
    levels = (
        " and ".join(distinct)
        if len(distinct) <= 2
        else f"{min(turns):.4g} V to {max(turns):.4g} V"
    )
    return (
        f"the loop does not oscillate properly: by t = {format_value(t, 's', 4)} the square has "
        f"turned back {len(turns)} times without crossing its mid-swing level "
        f"{loop.v_mid:.4g} V (it reverses at {levels}, its levels are {loop.v_low:.4g} V and "
        f"{loop.v_high:.4g} V): each comparator transition "
        f"(slew {_slew_text(loop.slew_rise)} up, "
        f"{_slew_text(loop.slew_fall)} down, delay "
        f"{format_value(loop.delay, 's', 3)}) lasts longer than the triangle takes to cross "
        f"back over its threshold. Widen the hysteresis (R1/R2 = {loop.r1 / loop.r2:.4g}), "
        "slow the ramp (R3·C1) or use a faster comparator."
    )


def _run(loop: _Loop, periods: int, settle_periods: int) -> _Trace:
    """Event-driven integration until ``periods`` settled periods have been seen."""
    tol = loop.tolerance_v
    mid = loop.v_mid
    a_g, b_g, c_g = loop.comparator_terms()
    max_periods = settle_periods + MAX_EXTRA_SETTLE_PERIODS + periods
    max_events = EVENTS_PER_PERIOD * (max_periods + 2)

    if not loop.v_low - tol <= loop.v_ref <= loop.v_high + tol:
        raise SimulationError(
            f"the loop cannot start: the reference {loop.v_ref:.4g} V lies outside the "
            f"integrator's output range {loop.v_low:.4g} V to {loop.v_high:.4g} V"
        )
    t, vt, vs = 0.0, loop.v_ref, loop.v_high
    target, decision = loop.v_high, 1.0
    pending: deque[tuple[float, float]] = deque()
    segments: list[_Segment] = []
    rises: list[float] = []
    falls: list[float] = []
    start: int | None = None
    events = 0

    unfinished: list[float] = []  # square levels where a transition turned back short of mid

    def note_crossing(time: float, before: float, after: float) -> None:
        if before < mid <= after:
            rises.append(time)
            unfinished.clear()
        elif before >= mid > after:
            falls.append(time)
            unfinished.clear()

    def apply_target(time: float, level: float) -> float:
        """Set the output's new level; returns vs after (a step if the slew is infinite)."""
        nonlocal target
        if vs != target and level != target:
            unfinished.append(vs)
            if len(unfinished) > MAX_UNFINISHED_TRANSITIONS:
                raise SimulationError(_unfinished_message(loop, t, unfinished))
        target = level
        rate = loop.slew_rise if level > vs else loop.slew_fall
        if level != vs and math.isinf(rate):
            note_crossing(time, vs, level)
            return level
        return vs

    while True:
        events += 1
        if events > max_events:
            raise SimulationError(
                f"gave up after {max_events} events at t = {format_value(t, 's', 4)} with "
                f"{max(len(rises) - 1, 0)} full periods seen: the loop does not settle into a "
                "regular oscillation"
            )
        if vs == target:
            slope_vs, u_square = 0.0, math.inf
        elif target > vs:
            slope_vs, u_square = loop.slew_rise, (target - vs) / loop.slew_rise
        else:
            slope_vs, u_square = -loop.slew_fall, (vs - target) / loop.slew_fall
        a1, a2, u_integrator = _integrator_piece(loop, vt, vs, slope_vs)
        g0 = a_g * vt + b_g * vs + c_g
        g1 = a_g * a1 + b_g * slope_vs
        g2 = a_g * a2
        u_decision = _first_fall_below(
            decision * g0, decision * g1, decision * g2, tol, tol / (loop.r3 * loop.c1)
        )
        u_pending = pending[0][0] - t if pending else math.inf
        u = min(u_square, u_integrator, u_decision, u_pending)
        if math.isinf(u):
            raise SimulationError(_stuck_message(loop, t, vt, vs))
        u = max(u, 0.0)

        if u > 0:
            if t + u > t:
                segments.append(_Segment(t, t + u, vt, a1, a2, vs, slope_vs))
            vs_end = target if u == u_square else vs + slope_vs * u
            if slope_vs != 0:
                note_crossing(t + min(max((mid - vs) / slope_vs, 0.0), u), vs, vs_end)
            t += u
            vt = min(max(vt + a1 * u + a2 * u * u, loop.v_low), loop.v_high)
            vs = vs_end
            for level in (loop.v_high, loop.v_low):
                if abs(vt - level) <= tol:
                    vt = level

        if u == u_decision:
            decision = -decision
            pending.append((t + loop.delay, loop.v_high if decision > 0 else loop.v_low))
        while pending and pending[0][0] <= t:
            vs = apply_target(t, pending.popleft()[1])

        if start is None and len(rises) >= max(settle_periods, 2) + 1:
            j = len(rises) - 1
            last, previous = rises[j] - rises[j - 1], rises[j - 1] - rises[j - 2]
            if abs(last - previous) <= SETTLE_TOLERANCE * last:
                start = j
            elif j >= settle_periods + MAX_EXTRA_SETTLE_PERIODS:
                raise SimulationError(
                    f"the loop did not settle: after {j} periods successive periods still "
                    f"differ by {abs(last - previous) / last:.3g} (relative)"
                )
        if start is not None and len(rises) > start + periods:
            return _Trace(segments, rises, falls, (start, start + periods), events)


def _clip(v: float, loop: _Loop) -> float:
    """Rounding in a segment's end value can step past a limit by ~1e-13 V; the limit holds."""
    return min(max(v, loop.v_low), loop.v_high)


def _measure(loop: _Loop, trace: _Trace) -> Measured:
    first, last = trace.window
    t_a, t_b = trace.rises[first], trace.rises[last]
    high_time = 0.0
    for rise in trace.rises[first:last]:
        index = int(np.searchsorted(trace.falls, rise, side="right"))
        high_time += trace.falls[index] - rise
    v_max, v_min = -math.inf, math.inf
    s_max, s_min = -math.inf, math.inf
    for seg in trace.segments:
        if seg.t1 < t_a or seg.t0 > t_b:
            continue
        u_lo, u_hi = max(t_a, seg.t0) - seg.t0, min(t_b, seg.t1) - seg.t0
        points = [u_lo, u_hi]
        if seg.a2 != 0:
            vertex = -seg.a1 / (2.0 * seg.a2)
            if u_lo < vertex < u_hi:
                points.append(vertex)
        for u in points:
            v = _clip(seg.a0 + seg.a1 * u + seg.a2 * u * u, loop)
            v_max, v_min = max(v_max, v), min(v_min, v)
            s = _clip(seg.b0 + seg.b1 * u, loop)
            s_max, s_min = max(s_max, s), min(s_min, s)
    ref = loop.v_ref
    return Measured(
        frequency_hz=(last - first) / (t_b - t_a),
        amplitude_vpp=v_max - v_min,
        duty_high=high_time / (t_b - t_a),
        offset_v=0.5 * (v_max + v_min) - ref,
        peak_high_v=v_max - ref,
        peak_low_v=v_min - ref,
        square_high_v=s_max - ref,
        square_low_v=s_min - ref,
    )


def _sample(
    loop: _Loop, trace: _Trace, max_points: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Exact samples over the measured window: every corner, plus an even grid to fill up."""
    first, last = trace.window
    t_a, t_b = trace.rises[first], trace.rises[last]
    segs = [s for s in trace.segments if s.t1 > t_a and s.t0 < t_b]
    starts = np.array([s.t0 for s in segs])
    coeffs = np.array([[s.a0, s.a1, s.a2, s.b0, s.b1] for s in segs])
    corners = starts[starts > t_a]
    # a step (infinite slew) needs the value on each side: count one extra point per corner
    n_grid = max_points - 2 * corners.size
    if n_grid >= 2:
        times = np.union1d(np.linspace(t_a, t_b, n_grid), corners)
    else:
        times = np.linspace(t_a, t_b, max_points // 2)
        corners = np.empty(0)

    def evaluate(at: np.ndarray, side: Literal["left", "right"]) -> tuple[np.ndarray, np.ndarray]:
        k = np.clip(np.searchsorted(starts, at, side=side) - 1, 0, len(segs) - 1)
        u = at - starts[k]
        c = coeffs[k]
        tri = c[:, 0] + c[:, 1] * u + c[:, 2] * u * u
        return np.clip(tri, loop.v_low, loop.v_high), np.clip(
            c[:, 3] + c[:, 4] * u, loop.v_low, loop.v_high
        )

    tri, sq = evaluate(times, "right")
    tri_left, sq_left = evaluate(corners, "left")
    _, sq_right = evaluate(corners, "right")
    jumps = np.abs(sq_left - sq_right) > 1e-9 * (1.0 + np.abs(sq_left))
    all_t = np.concatenate([times, corners[jumps]])
    all_tri = np.concatenate([tri, tri_left[jumps]])
    all_sq = np.concatenate([sq, sq_left[jumps]])
    # at equal times the left-hand value (from the earlier segment) comes first
    order = np.lexsort((np.concatenate([np.ones(times.size), np.zeros(int(jumps.sum()))]), all_t))
    out_t, out_tri, out_sq = all_t[order] - t_a, all_tri[order], all_sq[order]
    for array in (out_t, out_tri, out_sq):
        array.setflags(write=False)
    return out_t, out_tri, out_sq


def simulate(
    osc: Oscillator, *, periods: int = 10, max_points: int = 4000, settle_periods: int = 3
) -> SimulationResult:
    """Simulate ``osc`` in the time domain and measure ``periods`` settled periods.

    Frequency = periods / (time between the first and last rising mid-swing crossing of the
    square in the window); duty, peaks, amplitude and square levels as described on
    ``Measured``. Waveforms have at most ``max_points`` samples.

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
    loop = _loop_from(osc)
    trace = _run(loop, periods, settle_periods)
    measured = _measure(loop, trace)
    t_s, triangle, square = _sample(loop, trace, max_points)
    return SimulationResult(
        measured=measured,
        t_s=t_s,
        triangle_v=triangle,
        square_v=square,
        periods_measured=periods,
        reference_v=loop.v_ref,
        threshold_high_v=loop.trip_level(loop.v_low) - loop.v_ref,
        threshold_low_v=loop.trip_level(loop.v_high) - loop.v_ref,
        settle_time_s=trace.rises[trace.window[0]],
        events=trace.events,
    )
