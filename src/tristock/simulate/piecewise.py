"""The exact event-driven piecewise simulation (infinite gain-bandwidth in both op amps).

Between events every quantity is a polynomial in time: the square is constant or a ramp, the
integrator rate is constant or linear, so the triangle is linear or quadratic and the comparator
input g is at most quadratic. Each event (decision crossing, delayed output change, end of a
ramp, integrator reaching or leaving a rate or swing limit) is found as an exact root, so the
result has only floating-point error (about 1e-13 relative), no step-size error.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass
from typing import Literal, NamedTuple

import numpy as np

from tristock.circuits.timeloop import Loop
from tristock.simulate.loop import (
    EVENTS_PER_PERIOD,
    MAX_EXTRA_SETTLE_PERIODS,
    MAX_UNFINISHED_TRANSITIONS,
    SETTLE_TOLERANCE,
    stuck_message,
    unfinished_message,
)
from tristock.simulate.results import Measured, SimulationError
from tristock.stock.units import format_value


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
class PiecewiseTrace:
    segments: list[_Segment]
    rises: list[float]
    falls: list[float]
    window: tuple[int, int]  # indices into rises
    events: int


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
    loop: Loop, vt: float, vs: float, slope_vs: float
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


def run_piecewise(loop: Loop, periods: int, settle_periods: int) -> PiecewiseTrace:
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
                raise SimulationError(unfinished_message(loop, t, unfinished))
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
            raise SimulationError(stuck_message(loop, t, vt, vs))
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
            return PiecewiseTrace(segments, rises, falls, (start, start + periods), events)


def _clip(v: float, loop: Loop) -> float:
    """Rounding in a segment's end value can step past a limit by ~1e-13 V; the limit holds."""
    return min(max(v, loop.v_low), loop.v_high)


def measure_trace(loop: Loop, trace: PiecewiseTrace) -> Measured:
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


def sample_trace(
    loop: Loop, trace: PiecewiseTrace, max_points: int
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
