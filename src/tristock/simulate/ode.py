"""Finite gain-bandwidth in both op amps: the loop as an ODE between events.

Both channels are the same part, a single-pole amplifier whose input stage saturates like a
differential pair: output rate A(e) = SR·tanh(ωt·e/SR) for input voltage e (SR the rise rate
when e > 0, the fall rate below; ωt·e when SR is infinite), ωt = 2π·GBW (rad/s).

- Integrator (U1A): dvt/dt = A(Vref + Vos1 - vn), with its - input vn on C1:
  C1·d(vn - vt)/dt = (vs - vn)/R3 - Ib1.
- Comparator (U1B): dvs/dt = A(g(t - td)), g = v(+) - Vref - Vos2 as in the piecewise model,
  delayed by the transport delay td ahead of the amplifier (so it also delays the regenerative
  feedback); the output clamps hard at VOH and VOL: it sits there while A pushes outward and
  leaves the instant A turns inward, which (with g delayed) is exactly td after g crosses zero.

States (vs, vt, vn - vt), integrated by scipy's LSODA one step at a time (rtol 1e-10) with
every step's dense output kept: the delayed g comes from that history (in free flight the step
is at most td, so the delayed time always lies in a finished step). Events are found on each
step's dense output by bracketing and brentq: g crossing zero (schedules the release of a
clamped output), the square reaching a level (clamp), crossing mid-swing (periods, duty) and the
triangle's turning points (dvt/dt = 0, peaks). The triangle reaching its swing limit ends the
run with SimulationError: this path does not follow an integrator into saturation.
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt
from scipy.integrate import LSODA
from scipy.optimize import brentq

from tristock.circuits.timeloop import Loop
from tristock.simulate.loop import (
    MAX_EXTRA_SETTLE_PERIODS,
    MAX_UNFINISHED_TRANSITIONS,
    stuck_message,
    unfinished_message,
)
from tristock.simulate.results import Measured, SimulationError
from tristock.stock.units import format_value

FloatArray = npt.NDArray[np.float64]

#: Successive periods must agree to this relative difference before measuring (the ODE's own
#: tolerance is 1e-10 per step).
ODE_SETTLE_TOLERANCE = 1e-8
#: Solver steps allowed per simulated period (a healthy loop needs a few hundred).
STEPS_PER_PERIOD = 20000
RTOL = 1e-10


def amplifier_rate(e: float, wt: float, up: float, down: float) -> float:
    """A(e) = SR·tanh(ωt·e/SR) (V/s), SR = ``up`` for e > 0 else ``down``; ωt·e if SR = inf."""
    sr = up if e > 0.0 else down
    return wt * e if math.isinf(sr) else sr * math.tanh(wt * e / sr)


def _amplifier_slope(e: float, wt: float, up: float, down: float) -> float:
    """dA/de = ωt·sech²(ωt·e/SR), written to stay finite for any overdrive."""
    sr = up if e > 0.0 else down
    if math.isinf(sr):
        return wt
    q = math.exp(-2.0 * min(abs(wt * e / sr), 350.0))
    return wt * 4.0 * q / (1.0 + q) ** 2


@dataclass
class OdeTrace:
    """What a run saw: square crossings of mid-swing, the triangle's turning points (time, V),
    the measured window (indices into ``rises``), the step history and the step count."""

    rises: list[float] = field(default_factory=list)
    falls: list[float] = field(default_factory=list)
    turns: list[tuple[float, float]] = field(default_factory=list)
    window: tuple[int, int] = (0, 0)
    starts: list[float] = field(default_factory=list)
    dense: list[Callable[[float | FloatArray], FloatArray]] = field(default_factory=list)
    steps: int = 0


class _Run:
    """One integration of the loop (see the module notes)."""

    def __init__(self, loop: Loop, periods: int, settle_periods: int) -> None:
        self.loop = loop
        self.wt = 2.0 * math.pi * loop.gbw_hz
        self.a_g, self.b_g, self.c_g = loop.comparator_terms()
        self.periods = periods
        self.settle_periods = settle_periods
        self.trace = OdeTrace()
        self.mode = "high"  # "high" / "low": clamped at that level; "free": moving
        self.y0 = np.array([loop.v_high, loop.v_ref, 0.0])
        self.g0 = self.decision(self.y0)
        self.crossings: list[tuple[float, int]] = []  # g crossing zero: (time, +1 up / -1 down)
        self.unfinished: list[float] = []  # where edges turned back short of mid-swing
        self.leaving = "high"  # the level the square last left
        self.crossed_mid = False
        self.extreme = loop.v_high  # the square's farthest point from that level since
        self.start: int | None = None
        self.release_pending = False  # a clamped output's release is scheduled

    # -- the equations --------------------------------------------------------------------

    def decision(self, y: FloatArray) -> float:
        return float(self.a_g * y[1] + self.b_g * y[0] + self.c_g)

    def integrator_input(self, y: FloatArray) -> float:
        return float(self.loop.v_ref + self.loop.vos1 - (y[1] + y[2]))

    def state_at(self, t: float) -> FloatArray:
        if t <= 0.0:
            return self.y0
        i = bisect.bisect_right(self.trace.starts, t) - 1
        return self.trace.dense[i](t)

    def delayed_decision(self, t: float, y: FloatArray) -> float:
        if self.loop.delay == 0.0:
            return self.decision(y)
        past = t - self.loop.delay
        return self.g0 if past <= 0.0 else self.decision(self.state_at(past))

    def rhs(self, t: float, y: FloatArray) -> FloatArray:
        lp = self.loop
        dvt = amplifier_rate(self.integrator_input(y), self.wt, lp.slew_rise, lp.slew_fall)
        dw = ((y[0] - y[1] - y[2]) / lp.r3 - lp.ib1) / lp.c1
        dvs = 0.0
        if self.mode == "free":
            dvs = amplifier_rate(self.delayed_decision(t, y), self.wt, lp.slew_rise, lp.slew_fall)
        return np.array([dvs, dvt, dw])

    def jacobian(self, t: float, y: FloatArray) -> FloatArray:
        lp = self.loop
        k = _amplifier_slope(self.integrator_input(y), self.wt, lp.slew_rise, lp.slew_fall)
        g = 1.0 / (lp.r3 * lp.c1)
        jac = np.array([[0.0, 0.0, 0.0], [0.0, -k, -k], [g, -g, -g]])
        if self.mode == "free" and lp.delay == 0.0:
            s = _amplifier_slope(self.decision(y), self.wt, lp.slew_rise, lp.slew_fall)
            jac[0, 0], jac[0, 1] = s * self.b_g, s * self.a_g
        return jac

    # -- the run --------------------------------------------------------------------------

    def release_time(self, since: float) -> float:
        """When a clamped output leaves its level: td after the first crossing of g toward the
        other level later than ``since`` - td (history before t = 0 holds g0)."""
        toward = -1 if self.mode == "high" else 1
        if self.g0 * toward > 0.0 and since - self.loop.delay < 0.0:
            return 0.0
        later = [c for c, d in self.crossings if d == toward and c > since - self.loop.delay]
        return min(later) + self.loop.delay if later else math.inf

    def run(self, t_limit: float) -> OdeTrace:
        t, y = 0.0, self.y0.copy()
        release = self.release_time(0.0)
        max_steps = STEPS_PER_PERIOD * (self.settle_periods + MAX_EXTRA_SETTLE_PERIODS + 2)
        while True:
            self.release_pending = math.isfinite(release)
            if t >= release:
                self.leaving, self.mode, release = self.mode, "free", math.inf
                self.release_pending = False
                self.crossed_mid, self.extreme = False, float(y[0])
            bound = min(release, t_limit)
            step_cap = self.loop.delay if self.mode == "free" and self.loop.delay > 0 else np.inf
            solver = LSODA(
                self.rhs, t, y, bound, rtol=RTOL, atol=1e-12, max_step=step_cap, jac=self.jacobian
            )
            restart = None
            while solver.status == "running" and restart is None:
                t0 = solver.t
                message = solver.step()
                self.trace.steps += 1
                if solver.status == "failed":
                    raise SimulationError(f"the ODE solver failed at t = {t0:.6g} s: {message}")
                if self.trace.steps > max_steps:
                    raise SimulationError(
                        f"gave up after {max_steps} solver steps at t = "
                        f"{format_value(solver.t, 's', 4)}: the loop does not settle"
                    )
                dense = solver.dense_output()
                self.trace.starts.append(t0)
                self.trace.dense.append(dense)
                restart = self.events(t0, solver.t, dense)
                if self.finished():
                    return self.trace
            if restart is not None:
                t, y, release = restart
            else:
                t, y = solver.t, solver.y.copy()
                if t >= t_limit:
                    raise SimulationError(
                        f"the loop did not settle within {format_value(t_limit, 's', 4)}"
                    )

    def events(
        self, t0: float, t1: float, dense: Callable[[float], FloatArray]
    ) -> tuple[float, FloatArray, float] | None:
        """Handle what happened in the step [t0, t1]; a (time, state, release) to restart
        from when the mode changes or a release was scheduled inside it."""
        lp = self.loop
        y0, y1 = dense(t0), dense(t1)
        g_end = self.decision(y1)
        restart = None
        tc = self._root(lambda s: self.decision(dense(s)), t0, t1, self.decision(y0), g_end)
        if tc is not None:
            direction = 1 if g_end > 0.0 else -1
            self.crossings.append((tc, direction))
            toward = -1 if self.mode == "high" else 1
            if self.mode != "free" and direction == toward and not self.release_pending:
                self.release_pending = True
                restart = (tc, dense(tc), tc + lp.delay)
                t1, y1 = tc, restart[1]  # the rest of the step is run again from tc
        turn = self._root(
            lambda s: self.integrator_input(dense(s)),
            t0,
            t1,
            self.integrator_input(y0),
            self.integrator_input(y1),
        )
        if turn is not None:
            self.trace.turns.append((turn, float(dense(turn)[1])))
        if not lp.v_low < y1[1] < lp.v_high:
            raise SimulationError(self._swing_message(t1, float(y1[1]), float(y1[0])))
        if self.mode == "free":
            return self._free_events(t0, t1, dense, y0, y1) or restart
        return restart

    def _free_events(
        self,
        t0: float,
        t1: float,
        dense: Callable[[float], FloatArray],
        y0: FloatArray,
        y1: FloatArray,
    ) -> tuple[float, FloatArray, float] | None:
        lp = self.loop
        mid = lp.v_mid
        tm = self._root(_offset(dense, mid), t0, t1, y0[0] - mid, y1[0] - mid)
        if tm is not None:
            (self.trace.rises if y1[0] > mid else self.trace.falls).append(tm)
            self.crossed_mid = True
            self.unfinished.clear()
        far = min if self.leaving == "high" else max
        self.extreme = float(far(self.extreme, y1[0]))
        for level, name in ((lp.v_high, "high"), (lp.v_low, "low")):
            beyond = (y1[0] - level) if name == "high" else (level - y1[0])
            if beyond < 0.0:
                continue
            tl = self._root(_offset(dense, level), t0, t1, y0[0] - level, y1[0] - level)
            tl = t1 if tl is None else tl
            state = dense(tl).copy()
            state[0] = level
            if not self.crossed_mid and name == self.leaving:
                self.unfinished.append(self.extreme)
                if len(self.unfinished) > MAX_UNFINISHED_TRANSITIONS:
                    raise SimulationError(unfinished_message(lp, tl, self.unfinished))
            self.mode = name
            return tl, state, self.release_time(tl)
        return None

    @staticmethod
    def _root(
        fn: Callable[[float], float], t0: float, t1: float, f0: float, f1: float
    ) -> float | None:
        if f0 == 0.0 or f0 * f1 >= 0.0:
            return None
        return float(brentq(fn, t0, t1, xtol=1e-18, rtol=1e-15))

    def _swing_message(self, t: float, vt: float, vs: float) -> str:
        base = stuck_message(self.loop, t, vt, vs)
        if "swing limit" in base:
            return base
        return (
            f"the triangle reached the integrator's swing limit ({vt:.4g} V, output range "
            f"{self.loop.v_low:.4g} V to {self.loop.v_high:.4g} V) at t = "
            f"{format_value(t, 's', 4)}; the finite-GBW simulation does not follow an "
            "integrator into saturation. Reduce R1/R2 or widen the swing."
        )

    def finished(self) -> bool:
        rises = self.trace.rises
        if self.start is None and len(rises) >= max(self.settle_periods, 2) + 1:
            j = len(rises) - 1
            last, previous = rises[j] - rises[j - 1], rises[j - 1] - rises[j - 2]
            if abs(last - previous) <= ODE_SETTLE_TOLERANCE * last:
                self.start = j
            elif j >= self.settle_periods + MAX_EXTRA_SETTLE_PERIODS:
                raise SimulationError(
                    f"the loop did not settle: after {j} periods successive periods still "
                    f"differ by {abs(last - previous) / last:.3g} (relative)"
                )
        if self.start is not None and len(rises) > self.start + self.periods:
            self.trace.window = (self.start, self.start + self.periods)
            return True
        return False


def _offset(dense: Callable[[float], FloatArray], level: float) -> Callable[[float], float]:
    """The square's height above ``level`` along a step's dense output."""
    return lambda s: float(dense(s)[0]) - level


def run_ode(loop: Loop, periods: int, settle_periods: int, period_guess_s: float) -> OdeTrace:
    """Integrate ``loop`` until ``periods`` settled periods have been seen (see module notes);
    ``period_guess_s`` only bounds the simulated time (a thousand guesses)."""
    return _Run(loop, periods, settle_periods).run(1000.0 * period_guess_s)


def measure_ode(loop: Loop, trace: OdeTrace) -> Measured:
    """Frequency, duty, peaks and levels over the measured window (as the piecewise path)."""
    first, last = trace.window
    t_a, t_b = trace.rises[first], trace.rises[last]
    high_time = 0.0
    for rise in trace.rises[first:last]:
        index = bisect.bisect_right(trace.falls, rise)
        high_time += trace.falls[index] - rise
    inside = [v for t, v in trace.turns if t_a <= t <= t_b]
    ends = [float(_state(trace, t)[1]) for t in (t_a, t_b)]
    peak_high, peak_low = max(inside + ends), min(inside + ends)
    ref = loop.v_ref
    return Measured(
        frequency_hz=(last - first) / (t_b - t_a),
        amplitude_vpp=peak_high - peak_low,
        duty_high=high_time / (t_b - t_a),
        offset_v=0.5 * (peak_high + peak_low) - ref,
        peak_high_v=peak_high - ref,
        peak_low_v=peak_low - ref,
        square_high_v=loop.v_high - ref,
        square_low_v=loop.v_low - ref,
    )


def _state(trace: OdeTrace, t: float) -> FloatArray:
    return trace.dense[bisect.bisect_right(trace.starts, t) - 1](t)


def sample_ode(
    loop: Loop, trace: OdeTrace, max_points: int
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """``max_points`` evenly spaced samples of (t from the window's start, triangle, square)."""
    first, last = trace.window
    t_a, t_b = trace.rises[first], trace.rises[last]
    times = np.linspace(t_a, t_b, max_points)
    which = np.searchsorted(np.asarray(trace.starts), times, side="right") - 1
    tri = np.empty_like(times)
    sq = np.empty_like(times)
    for index in np.unique(which):
        pick = which == index
        values = np.asarray(trace.dense[int(index)](times[pick]))
        sq[pick], tri[pick] = values[0], values[1]
    out = (times - t_a, tri, np.clip(sq, loop.v_low, loop.v_high))
    for array in out:
        array.setflags(write=False)
    return out
