"""Budgeted sympy work remembered within a process: the same answers, and the fix search gives the same fixes."""
from __future__ import annotations

import time

import pytest
import sympy as sp

from condhint import once
from condhint.budget import OverBudget
from condhint.engine import Lru
from tests.rewrites.support import fixes_of


@pytest.fixture
def fresh(monkeypatch) -> Lru:
    memory: Lru = Lru(4096)
    monkeypatch.setattr(once, "_DONE", memory)
    return memory


def test_equal_expressions_are_worked_on_once(fresh):
    x = sp.Symbol("x", real=True)
    first = once.once_with_budget(sp.factor, (x**2 - 1,), 5.0)
    assert once.once_with_budget(sp.factor, (x**2 - 1,), 5.0) is first and fresh.hits == 1
    positive = sp.Symbol("x", real=True, positive=True)  # other assumptions: another question
    assert once.once_with_budget(sp.factor, (positive**2 - 1,), 5.0) == (positive - 1) * (positive + 1)
    assert once.once_with_budget(sp.expand, (x**2 - 1,), 5.0) == x**2 - 1 and fresh.hits == 1


def _slow(seconds: float) -> float:
    time.sleep(seconds)
    return seconds


def test_work_that_ran_out_of_budget_is_not_remembered(fresh):
    with pytest.raises(OverBudget):
        once.once_with_budget(_slow, (0.5,), 0.05)
    assert once.once_with_budget(_slow, (0.01,), 2.0) == 0.01
    with pytest.raises(OverBudget):
        once.once_with_budget(_slow, (0.5,), 0.05)
    assert fresh.hits == 0


@pytest.mark.parametrize("src", [
    "def f(x):  # condhint: 1e5 <= x <= 1e7\n    return (x + 1)**3 - x**3\n",  # the sympy transforms
    "import math\ndef f(x):  # condhint: 1e-8 <= x <= 3\n    return x - math.sin(x)\n",  # the series
])
def test_remembered_work_gives_the_same_fixes(fresh, src):
    _, first, _ = fixes_of(src)
    hits = fresh.hits
    _, again, _ = fixes_of(src)
    assert first and again == first and fresh.hits > hits
