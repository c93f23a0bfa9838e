"""analysis.memo and what remembers through it: the least recently used entries go first
within the count and byte budgets (common practice for an LRU memory), and the Monte Carlo
remembers its samples, never its bands, as the checks and the temperature drift remember
theirs per board and supply (the reference is the same call with the memory emptied)."""

from __future__ import annotations

import numpy as np

from tristock.analysis.memo import Memo, forget
from tristock.analysis.montecarlo import SAMPLED, monte_carlo
from tristock.analysis.sensitivity import DRIFTS, temperature_drift
from tristock.designs.candidate import CHECKED, warnings_for
from tristock.designs.fixed import design_of, run_engine
from tristock.examples import demo_catalog_dir, example_spec_path
from tristock.search.model import build_model
from tristock.spec.loading import load_spec
from tristock.stock.catalog import load_catalog


def test_least_recently_used_go_first_within_both_budgets() -> None:
    memo: Memo[np.ndarray] = Memo(max_items=3, max_bytes=100, size=lambda a: int(a.nbytes))
    for key in "abc":
        memo.put(key, np.zeros(2))  # 16 bytes each
    assert memo.get("a") is not None  # a is now the most recent
    memo.put("d", np.zeros(2))
    assert memo.get("b") is None and len(memo) == 3
    memo.put("e", np.zeros(10))  # 80 bytes: over the byte budget, the oldest go
    assert len(memo) == 2 and memo.get("e") is not None and memo.get("d") is not None
    memo.put(None, np.zeros(1))  # a board that cannot be a key is not remembered
    assert len(memo) == 2
    forget()
    assert len(memo) == 0


def test_monte_carlo_remembers_samples_not_bands() -> None:
    spec = load_spec(example_spec_path("demo"))
    model = build_model(spec, load_catalog(demo_catalog_dir()))
    board = design_of(model, run_engine(model, "enumerate", 1, 30.0).rows, 0)
    forget()
    first = monte_carlo(board, spec, samples=2000, seed=3)
    assert len(SAMPLED) == 1
    assert spec.frequency is not None
    narrow = spec.model_copy(
        update={"frequency": spec.frequency.model_copy(update={"tolerance_pct": 0.2})}
    )
    remembered = monte_carlo(board, narrow, samples=2000, seed=3)
    forget()
    fresh = monte_carlo(board, narrow, samples=2000, seed=3)
    assert remembered == fresh and remembered.spread == first.spread
    assert remembered.passed < first.passed
    remembered.spread["frequency_hz"].clear()  # a copy: the remembered one is untouched
    assert monte_carlo(board, narrow, samples=2000, seed=3) == fresh


def test_checks_and_drift_are_remembered_per_board_and_supply() -> None:
    spec = load_spec(example_spec_path("demo"))
    model = build_model(spec, load_catalog(demo_catalog_dir()))
    board = design_of(model, run_engine(model, "enumerate", 1, 30.0).rows, 0)
    forget()
    checks, drift = warnings_for(board, spec), temperature_drift(board, spec)
    assert len(CHECKED) == 1 and len(DRIFTS) == 1
    checks.clear()  # a copy: the remembered list is untouched
    assert warnings_for(board, spec) == warnings_for(board, spec) != []
    assert temperature_drift(board, spec) is drift
    assert len(CHECKED) == 1 and len(DRIFTS) == 1
    # another supply or environment is another entry, computed afresh (the reference: the
    # same call with the memory emptied)
    hot = spec.model_copy(
        update={"environment": spec.environment.model_copy(update={"temp_max_c": 85.0})}
    )
    warm_drift = temperature_drift(board, hot)
    assert len(DRIFTS) == 2
    forget()
    assert temperature_drift(board, hot) == warm_drift != drift
