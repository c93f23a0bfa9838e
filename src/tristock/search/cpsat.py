"""CP-SAT engine: a table of candidate rows, the part choices and their coupling in the solver.

A plain CP-SAT model over one-hot part choices finds good answers but cannot prove them (the
closest-product problem gives it a weak bound). So the rows come from the exact lister (the
enumeration engine): the best M feasible rows by score, and the score of row M+1 as a bound on
every row left out. CP-SAT then chooses one row through a model stated over the parts: a
Boolean per row, each part's uses as sums of those Booleans, stock x boards summed over every
position a stock code fills, cost per board, BOM lines, and the objective built from the part
choices. (The lister applies the same limits, so that a low max_cost cannot leave a table of
rows that all fail it; the solver's constraints are the statement the answer is checked
against.) Top-k comes from k solves, each excluding the rows already returned, with ties at the
k-th score collected. If the k-th answer scores above the bound, a left-out row might beat it:
M grows and the search repeats.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from ortools.sat.python import cp_model

from tristock.search.enumeration import EngineResult, enumerate_top
from tristock.search.model import COST_RESOLUTION, SECONDARY_SPAN, SearchModel
from tristock.search.rows import Rows, rank_key


@dataclass
class _Table:
    rows: Rows
    bound: int | None  # packed score of the best row left out; None: nothing left out


def _list_rows(model: SearchModel, m: int, time_limit_s: float) -> tuple[_Table, bool]:
    listed = enumerate_top(model, m + 1, time_limit_s, coupled=True)
    rows = listed.rows
    if len(rows) <= m:
        return _Table(rows, None), listed.proven_optimal
    last = m
    bound = int(rows.primary[last]) * SECONDARY_SPAN + int(rows.secondary[last])
    return _Table(rows.take(np.arange(m)), bound), listed.proven_optimal


def _build(model: SearchModel, table: _Table) -> tuple[cp_model.CpModel, list[cp_model.IntVar]]:
    """The CP-SAT model: one Boolean per row, part-use expressions, coupled constraints."""
    spec, res, cap = model.spec, model.resistors, model.capacitors
    rows = table.rows
    boards = model.boards
    cp = cp_model.CpModel()
    choose_row = [cp.new_bool_var(f"row_{n}") for n in range(len(rows))]
    cp.add_exactly_one(choose_row)

    def uses(position: np.ndarray, index: int) -> cp_model.LinearExpr:
        return cp_model.LinearExpr.sum([choose_row[n] for n in np.flatnonzero(position == index)])

    use_r1 = {int(i): uses(rows.i1, int(i)) for i in np.unique(rows.i1)}
    use_r2 = {int(i): uses(rows.i2, int(i)) for i in np.unique(rows.i2)}
    use_r3 = {int(i): uses(rows.i3, int(i)) for i in np.unique(rows.i3)}
    use_u1 = {int(o): uses(rows.u, int(o)) for o in np.unique(rows.u)}
    use_c1 = {int(j): uses(rows.j, int(j)) for j in np.unique(rows.j)}
    # The stage's own resistors (a pull-up or clamp resistor R5): pieces per board and use.
    stage_res, stage_pieces = (x[rows.u] for x in model.stage_resistors)  # (rows, m)
    stage_codes = (stage_res >= 0).sum(axis=1)
    use_stage_r = {
        int(i): cp_model.LinearExpr.weighted_sum(
            choose_row, [int(c) for c in (stage_pieces * (stage_res == i)).sum(axis=1)]
        )
        for i in np.unique(stage_res[stage_res >= 0])
    }
    resistor_ids = sorted(set(use_r1) | set(use_r2) | set(use_r3) | set(use_stage_r))

    # Stock: every position a stock code fills takes one piece per board.
    zero = cp_model.LinearExpr.sum([])
    resistor_line = {}
    for i in resistor_ids:
        positions = [d.get(i) for d in (use_r1, use_r2, use_r3, use_stage_r)]
        pieces = sum((e for e in positions if e is not None), zero)
        cp.add(boards * pieces <= int(res.stock[i]))
        on_bom = cp.new_bool_var(f"bom_resistor_{res.parts[i].id}")
        for expr in positions:
            if expr is not None:
                cp.add(on_bom >= expr)
        resistor_line[i] = on_bom
    for o, expr in use_u1.items():
        for part, per_board in model.opamps[o].option.stock_needs:
            cp.add(boards * per_board * expr <= part.stock)
    for j, expr in use_c1.items():
        cp.add(boards * expr <= int(cap.stock[j]))

    # Cost per board, in integer steps of COST_RESOLUTION.
    def cents(x: float) -> int:
        return round(x / COST_RESOLUTION)

    cost = (
        sum(cents(model.opamps[o].option.cost_per_board) * e for o, e in use_u1.items())
        + sum(cents(res.cost[i]) * e for i, e in use_r1.items())
        + sum(cents(res.cost[i]) * e for i, e in use_r2.items())
        + sum(cents(res.cost[i]) * e for i, e in use_r3.items())
        + sum(cents(cap.cost[j]) * e for j, e in use_c1.items())
    )
    if spec.limits.max_cost is not None:
        cp.add(cost <= cents(spec.limits.max_cost))

    # Objective: the packed score primary·SPAN + secondary, built from the choices.
    r_term = model.resistor_term(np.arange(len(res)))
    c_term = model.capacitor_term(np.arange(len(cap)))
    row_term = model.row_term(rows.e_f, rows.e_a, rows.share)
    # Lines saved against one per resistor position (R1, R2, R3 and the stage's codes, which
    # the stage's own term already counts).
    slots = 3 + cp_model.LinearExpr.weighted_sum(choose_row, [int(c) for c in stage_codes])
    saved_lines = slots - cp_model.LinearExpr.sum(list(resistor_line.values()))
    primary = (
        cp_model.LinearExpr.weighted_sum(choose_row, [int(e) for e in row_term])
        + sum(int(model.stage_terms[o]) * e for o, e in use_u1.items())
        + sum(int(r_term[i]) * e for i, e in use_r1.items())
        + sum(int(r_term[i]) * e for i, e in use_r2.items())
        + sum(int(r_term[i]) * e for i, e in use_r3.items())
        + sum(int(c_term[j]) * e for j, e in use_c1.items())
        - model.shared_line_credit() * saved_lines
    )
    secondary = cp_model.LinearExpr.weighted_sum(choose_row, [int(s) for s in rows.secondary])
    cp.minimize(SECONDARY_SPAN * primary + secondary)
    return cp, choose_row


def _solve_top(
    model: SearchModel, table: _Table, top: int, deadline: float
) -> tuple[list[int], list[int], bool]:
    """Row numbers of the best ``top`` (ties at the cut all collected), their packed scores,
    and whether every solve finished."""
    cp, choose_row = _build(model, table)
    chosen: list[int] = []
    scores: list[int] = []
    complete = True
    tie_extra = 0
    while len(chosen) < min(top, len(table.rows)) or (
        scores and len(chosen) < len(table.rows) and tie_extra < 50
    ):
        remaining = deadline - time.perf_counter()
        if remaining <= 0:
            complete = False
            break
        solver = cp_model.CpSolver()
        solver.parameters.max_time_in_seconds = remaining
        solver.parameters.num_workers = 2
        solver.parameters.catch_sigint_signal = False  # Ctrl-C must reach the caller
        status = solver.solve(cp)
        if status == cp_model.INFEASIBLE:
            break
        if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
            complete = False
            break
        if status == cp_model.FEASIBLE:
            complete = False
        n = next(n for n, b in enumerate(choose_row) if solver.boolean_value(b))
        score = round(solver.objective_value)
        if len(chosen) >= top:
            if score != scores[top - 1]:
                break
            tie_extra += 1
        chosen.append(n)
        scores.append(score)
        cp.add(choose_row[n] == 0)
    return chosen, scores, complete


def cpsat_top(model: SearchModel, top: int, time_limit_s: float) -> EngineResult:
    """The ``top`` best combinations, proven optimal when the table's bound allows."""
    t0 = time.perf_counter()
    deadline = t0 + time_limit_s
    m = max(50, 5 * top)
    evaluated = 0
    while True:
        table, listed_ok = _list_rows(model, m, max(deadline - time.perf_counter(), 0.0))
        evaluated += len(table.rows)
        chosen, scores, complete = _solve_top(model, table, top, deadline)
        short = len(chosen) < top
        beaten = table.bound is not None and (short or scores[top - 1] > table.bound)
        if not beaten or not complete or time.perf_counter() > deadline:
            break
        m *= 4
    rows = table.rows.take(np.array(chosen, dtype=np.int64))
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    rows = rows.take(np.array(order, dtype=np.int64))
    proven = listed_ok and complete and not beaten
    return EngineResult(rows, proven, evaluated, time.perf_counter() - t0)
