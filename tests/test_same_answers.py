"""Every stored answer is computed again and must come out identical: the same parts and
words, every figure equal to 1e-12 relative, only run times left out (``elapsed_s``).

The answers (``tests/fixtures/answers/``) were written by ``tests/make_answer_fixtures.py``
before the code was reorganised into its layers; what they pin is this code's own earlier
output, not an outside reference. Regenerate them only for an intended change of behaviour,
and say so in the commit.
"""

from __future__ import annotations

import json

import pytest

from make_answer_fixtures import ANSWERS, differences, fresh_answer, stored_cases


def test_the_answers_are_stored() -> None:
    names = stored_cases()
    assert {"demo_example", "trimmed_example", "tuned_example", "demo_tuned_seeded"} <= set(names)
    assert len(names) >= 22


@pytest.mark.parametrize("name", stored_cases())
def test_same_answer(name: str) -> None:
    stored = json.loads((ANSWERS / f"{name}.json").read_text())
    diff = differences(stored, fresh_answer(name))
    assert not diff, f"{name}: {len(diff)} differences, first: " + "; ".join(diff[:5])


def test_differences_sees_a_changed_figure() -> None:
    stored = {"a": [1.0, {"b": "x"}], "n": 3}
    assert differences(stored, {"a": [1.0 + 1e-13, {"b": "x"}], "n": 3}) == []
    assert differences(stored, {"a": [1.0 + 1e-11, {"b": "x"}], "n": 3}) != []
    assert differences(stored, {"a": [1.0, {"b": "y"}], "n": 3}) != []
    assert differences(stored, {"a": [1.0, {"b": "x"}], "n": 4}) != []
    assert differences(stored, {"a": [1.0], "n": 3}) != []
