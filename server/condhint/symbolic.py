"""The symbolic bridge: expression DAGs -> sympy, and the κ formula.

sympy objects are built node by node from our own DAG (never from text), so no user text is parsed or
evaluated. Work that can take long runs in `budget.run_with_budget`.
"""
from __future__ import annotations

import re
from functools import lru_cache
from typing import Any

import sympy as sp

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, topological
from condhint.numeric.operations import OPERATIONS

_SAFE = re.compile(r"[^0-9A-Za-z_]")


def symbol_name(name: str) -> str:
    """A sympy symbol name for an input (attributes and subscripts become identifiers)."""
    s = _SAFE.sub("_", name)
    return s if s and not s[0].isdigit() else f"v_{s}"


def _const(node: Node) -> sp.Expr:
    exact = node.exact or repr(node.value)
    named = {"pi": sp.pi, "e": sp.E, "tau": 2 * sp.pi, "euler_gamma": sp.EulerGamma, "inf": sp.oo}
    neg = exact.startswith("-")
    core = exact[1:] if neg else exact
    if core in named:
        v = named[core]
    elif "/" in core:
        a, b = core.split("/")
        v = sp.Rational(int(a), int(b))
    else:
        v = sp.Rational(core) if any(ch in core for ch in ".eE") else sp.Integer(int(core))
    return -v if neg else v


_CMP = {"<": sp.Lt, "<=": sp.Le, ">": sp.Gt, ">=": sp.Ge, "==": sp.Eq, "!=": sp.Ne}


def operation(node: Node, args: list[Any], forms: dict[str, Any] | None = None) -> Any:
    """sympy for one non-leaf node from its operands' sympy forms (`forms` may override functions)."""
    if node.kind == COMPARE:
        return _CMP[node.name](*args)  # type: ignore[index]
    if node.kind == SELECT:
        c, a, b = args
        return sp.Piecewise((a, c), (b, True))
    fn = (forms or {}).get(node.kind)
    if fn is None:
        op = OPERATIONS.get(node.kind)
        if op is None:
            raise ValueError(f"no symbolic form for {node.kind}")
        fn = op.sympy_form(sp)  # the record's exact form
    return fn(*args)


def to_sympy(root: Node, positive: set[str] | None = None) -> tuple[sp.Expr, dict[str, sp.Symbol]]:
    """The exact real function a DAG computes, with one real symbol per input."""
    positive = positive or set()
    symbols: dict[str, sp.Symbol] = {}
    vals: dict[int, Any] = {}
    for node in topological(root):
        if node.kind == INPUT:
            name = node.name or "x"
            if name not in symbols:
                symbols[name] = sp.Symbol(symbol_name(name), real=True, positive=True if name in positive else None,
                                          integer=True if node.is_int else None)
            vals[id(node)] = symbols[name]
        elif node.kind == CONST:
            vals[id(node)] = _const(node)
        else:
            vals[id(node)] = operation(node, [vals[id(x)] for x in node.args])
    return vals[id(root)], symbols


SIMPLIFY_UP_TO = 160  # characters: `simplify` shortens small terms; on long ones it can run for minutes
TERM_UP_TO = 1000  # characters of a cancelled term of κ: beyond, the formula is not one a reader can use


class TooLong(ValueError):
    """The κ formula would be too long to read."""


def kappa_expression(expr: sp.Expr, symbols: dict[str, sp.Symbol]) -> sp.Expr:
    """κ = Σᵢ |xᵢ ∂f/∂xᵢ / f|, each term cancelled and in its shortest form (`_shortest`); `TooLong` when a
    cancelled term is longer than TERM_UP_TO characters (its shortest form, a sum of such terms, would be too)."""
    terms = []
    for s in symbols.values():
        q = sp.cancel(s * sp.diff(expr, s) / expr)
        size = len(sp.sstr(q))
        if size > TERM_UP_TO:
            raise TooLong(f"too long to read (a term of {size:,} characters)")
        t = _shortest(q)
        if t != 0:
            terms.append(sp.Abs(t))
    return sp.Add(*terms) if terms else sp.Integer(0)


@lru_cache(maxsize=4096)  # equal terms recur across a package's formulas; sympy expressions hash by value
def _shortest(q: sp.Expr) -> sp.Expr:
    """One term of κ in its shortest form: common factors pulled out and, when that is short enough to read,
    `simplify` (not for a rational function, where `factor` does as well), or `factor` (for a rational
    function, or with radicals taken out of the denominator first: sqrt(n + 1) - sqrt(n) gives
    -sqrt(n)/(2*sqrt(n + 1)), which `simplify` alone misses), whichever prints shortest."""
    t = sp.factor_terms(q)
    if len(sp.sstr(t)) <= SIMPLIFY_UP_TO:
        rational, radical = q.is_rational_function(), _has_radical(q)
        shorter = [t] if rational else [t, sp.simplify(q)]
        if rational or radical:  # otherwise `factor` was never shorter than `simplify` (211 terms of scipy.signal)
            shorter.append(sp.factor(sp.radsimp(q) if radical else q))
        t = min(shorter, key=lambda e: len(sp.sstr(e)))
    return t


def _has_radical(e: sp.Expr) -> bool:
    return any(p.exp.is_Rational and not p.exp.is_Integer for p in e.atoms(sp.Pow))


def kappa_formula_text(root: Node, positive: set[str]) -> str:
    """The κ formula as text in Python-like notation (run it under a time budget)."""
    expr, symbols = to_sympy(root, positive)
    k = kappa_expression(expr, symbols)
    return sp.sstr(k)
