"""The joint proposal: one option per affected design, all planned builds covered at once,
the fewest changed designators in total; and the lower bound that proves it.

Proposal (CP-SAT): a boolean x[d, o] per design d and option o, exactly one per design; for
every stock code c, Σ boards_d · pieces_o(c) · x[d, o] ≤ R(c), the residual stock (stock less
the unaffected designs' needs). Minimise Σ changes(o)·x; once that is proven, fix it and
minimise Σ position(o)·x, where position is the option's place in its design's list (fewest
changes, then cost, then stock codes), so ties fall the same way on every run (one search
worker, fixed seed).

Lower bound (CP-SAT over a relaxation, ``tristock.registry.options``): per design a boolean
y[d, c] for each over-subscribed code it uses (the option reduces c) and an integer cost
k[d] ≥ L0, k[d] ≥ Σ_c y[d, c], k[d] ≥ n_S·(Σ_{c∈S} y[d, c] - |S| + 1) for each bound
(S, n_S), Σ_{c∈S} y[d, c] ≤ |S| - 1 where no design reduces all of S; per over-subscribed
code Σ_d need_d(c)·(1 - y[d, c]) ≤ stock(c) (an option that reduces c is taken to need none of
it, an optimistic count). Every joint proposal maps onto a solution of the relaxation with
k[d] at most its changes, so the relaxation's optimum is a lower bound. The proposal is
*proven* minimal when both solves are optimal and the totals are equal.

The scope, stated plainly: designs not affected keep their parts (their builds are reserved
first); the proof covers every proposal that changes affected designs only.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

from ortools.sat.python import cp_model

from tristock.registry.options import DesignOptions, Option

#: Seed of both solves (any fixed value: the same answer on every run).
SEED = 7


@dataclass(frozen=True)
class Affected:
    """An affected design: its options, its planned boards and released pieces per board."""

    options: DesignOptions
    boards: int
    pieces: dict[str, int]
    over: tuple[str, ...]


@dataclass(frozen=True)
class JointAnswer:
    """``chosen[name]`` the option picked (None: no proposal); ``lower_bound`` the
    relaxation's optimum (None when unsolved); ``status`` the proposal's solver status."""

    chosen: dict[str, Option] | None
    changes: int | None
    lower_bound: int | None
    proven: bool
    status: str
    infeasible_proven: bool
    solve_s: float
    bound_s: float


def _solver(time_limit_s: float) -> cp_model.CpSolver:
    solver = cp_model.CpSolver()
    solver.parameters.max_time_in_seconds = max(time_limit_s, 0.01)
    solver.parameters.num_workers = 1
    solver.parameters.random_seed = SEED
    return solver


def propose(
    affected: list[Affected], residual: dict[str, int], time_limit_s: float
) -> tuple[dict[str, Option] | None, int | None, str]:
    """The proposal over the options found: (choice, total changes, status name of the
    change count's solve)."""
    model = cp_model.CpModel()
    choice: dict[str, list[tuple[cp_model.IntVar, Option]]] = {}
    usage: dict[str, list[tuple[int, cp_model.IntVar]]] = {}
    changes, positions = [], []
    for a in affected:
        name = a.options.name
        row = []
        for position, option in enumerate(a.options.options):
            x = model.new_bool_var(f"x[{name},{position}]")
            row.append((x, option))
            changes.append(len(option.changed) * x)
            positions.append(position * x)
            for code, pieces in option.pieces.items():
                usage.setdefault(code, []).append((a.boards * pieces, x))
        model.add_exactly_one(x for x, _ in row)
        choice[name] = row
    for code, terms in usage.items():
        model.add(sum(n * x for n, x in terms) <= max(residual.get(code, 0), 0))
    model.minimize(sum(changes))
    solver = _solver(time_limit_s)
    status = solver.solve(model)
    if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
        return None, None, solver.status_name(status)
    name_of_status = solver.status_name(status)
    if status == cp_model.OPTIMAL:  # then the ties: each design's own order
        best = round(solver.objective_value)
        for row in choice.values():
            for x, _ in row:
                model.add_hint(x, solver.value(x))
        model.add(sum(changes) == best)
        model.minimize(sum(positions))
        tie_break = _solver(time_limit_s)
        if tie_break.solve(model) in (cp_model.OPTIMAL, cp_model.FEASIBLE):
            solver = tie_break
    chosen = {
        name: next(option for x, option in row if solver.value(x)) for name, row in choice.items()
    }
    total = sum(len(o.changed) for o in chosen.values())
    return chosen, total, name_of_status


def lower_bound(
    affected: list[Affected], stock: dict[str, int], time_limit_s: float
) -> tuple[int | None, str]:
    """The relaxation's optimum (a lower bound on any proposal's changes) and its status;
    None when it is not solved to optimality (INFEASIBLE: no proposal exists at all)."""
    model = cp_model.CpModel()
    costs = []
    reduced_need: dict[str, list[tuple[int, cp_model.IntVar]]] = {}
    for a in affected:
        name = a.options.name
        most = max(len(a.options.options[-1].changed) if a.options.options else 0, 64)
        k = model.new_int_var(0, most, f"k[{name}]")
        y = {c: model.new_bool_var(f"y[{name},{c}]") for c in a.over}
        model.add(k >= sum(y.values()))
        for bound in a.options.bounds:
            ys = [y[c] for c in bound.reduces]
            if bound.changes is None:
                if not ys:
                    model.add_bool_or([])  # the design cannot be built at all
                else:
                    model.add(sum(ys) <= len(ys) - 1)
            elif not ys:
                model.add(k >= bound.changes)
            else:
                model.add(k >= bound.changes * (sum(ys) - len(ys) + 1))
        for c in a.over:
            reduced_need.setdefault(c, []).append((a.boards * a.pieces.get(c, 0), y[c]))
        costs.append(k)
    for c, terms in reduced_need.items():
        model.add(sum(n * (1 - y) for n, y in terms) <= max(stock.get(c, 0), 0))
    model.minimize(sum(costs))
    solver = _solver(time_limit_s)
    status = solver.solve(model)
    if status != cp_model.OPTIMAL:
        return None, solver.status_name(status)
    return round(solver.objective_value), solver.status_name(status)


def solve_joint(
    affected: list[Affected],
    residual: dict[str, int],
    stock: dict[str, int],
    time_limit_s: float,
) -> JointAnswer:
    """The proposal and its proof (see the module's docstring)."""
    t0 = time.perf_counter()
    chosen, total, status = propose(affected, residual, time_limit_s)
    t1 = time.perf_counter()
    bound, bound_status = lower_bound(affected, stock, time_limit_s)
    t2 = time.perf_counter()
    proven = chosen is not None and status == "OPTIMAL" and bound is not None and bound == total
    return JointAnswer(
        chosen=chosen,
        changes=total,
        lower_bound=bound,
        proven=proven,
        status=status,
        infeasible_proven=bound_status == "INFEASIBLE",
        solve_s=t1 - t0,
        bound_s=t2 - t1,
    )
