"""Budgeted pure work (sympy on an expression) done once per process for equal arguments.

The fix search asks sympy the same questions again and again: findings of one site share their targets, and
equal expressions recur across a package. Only finished work is remembered: work that ran out of its time
budget is tried again the next time (with that call's budget), so no result depends on what ran before.
"""
from __future__ import annotations

from typing import Any, Callable, Hashable

from condhint.budget import run_with_budget
from condhint.engine import Lru

_DONE: Lru[tuple[Any]] = Lru(4096)


def once_with_budget(fn: Callable[..., Any], args: tuple[Hashable, ...], seconds: float) -> Any:
    """`run_with_budget(fn, args, seconds)`, remembered: `fn` must be pure and its arguments hashable by value
    (sympy expressions are: symbols with their assumptions, numbers, structure)."""
    key = (fn.__module__, fn.__qualname__, args)
    hit = _DONE.get(key)
    if hit is not None:
        return hit[0]
    out = run_with_budget(fn, args, seconds)
    _DONE.put(key, (out,))
    return out
