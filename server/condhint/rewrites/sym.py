"""sympy for rewrites: DAG -> sympy with chosen nodes kept as symbols, and sympy -> DAG reusing original nodes.

sympy objects are built from our DAG node by node (never from text). Converting back, every sympy
subexpression equal to that of an original node gives back the original node, so the user's text survives.
"""
from __future__ import annotations

from fractions import Fraction
from typing import Any, Callable

import sympy as sp

from condhint.expr import CONST, INPUT, Node, topological
from condhint.numeric.operations import OPERATIONS
from condhint.rewrites import dag
from condhint.symbolic import _const, operation, symbol_name


class Translation:
    """One DAG in sympy: `expr`, the symbols standing for atoms, and the way back to original nodes."""

    def __init__(self, root: Node, atoms: set[int], positive: Callable[[Node], bool], exact_forms: bool = False
                 ) -> None:
        self.symbols: dict[sp.Symbol, Node] = {}
        self.nodes: dict[sp.Basic, Node] = {}  # sympy form -> original node (first seen wins)
        self.consts: dict[Fraction, Node] = {}
        names: dict[str, int] = {}
        vals: dict[int, Any] = {}
        for node in topological(root):
            if node.kind == INPUT or id(node) in atoms:
                base = symbol_name(atom_name(node))
                k = names.get(base, 0)
                names[base] = k + 1
                sym = sp.Symbol(base if k == 0 else f"{base}_{k}", real=True, positive=True if positive(node) else None)
                self.symbols[sym] = node
                vals[id(node)] = sym
            elif node.kind == CONST:
                vals[id(node)] = _const(node)
                v = dag.const_value(node)
                if v is not None:
                    self.consts.setdefault(v, node)
            else:
                vals[id(node)] = operation(node, [vals[id(x)] for x in node.args],
                                           None if exact_forms else _NAMED)
            if node.text or node.kind in (INPUT, CONST):  # the user's nodes; a rule-built one is no text to keep
                self.nodes.setdefault(vals[id(node)], node)
        self.expr = vals[id(root)]


def atom_name(node: Node) -> str:
    return node.name or (node.text if node.text.isidentifier() else "v")


# Operations with a sympy function class of their own (sympy.sin, sympy.codegen's expm1, …), from the records: in
# rewrites they are built as that class, so that simplification keeps them, and the class converts back to them.
_NAMED: dict[str, Any] = {op.id: op.sympy_form(sp, named=True) for op in OPERATIONS.values()
                          if op.sympy_named is not None}


def named(op_id: str) -> Any:
    """The sympy function class standing for an operation in rewrites (`named("expm1")`: sympy.codegen's expm1)."""
    return _NAMED[op_id]


def to_sympy(root: Node, atoms: set[int] | None = None, positive: Callable[[Node], bool] | None = None,
             exact_forms: bool = False) -> Translation:
    return Translation(root, atoms or set(), positive or (lambda n: False), exact_forms)


class Untranslatable(Exception):
    """The sympy expression uses something our DAG cannot express."""


def from_sympy(expr: Any, tr: Translation) -> Node:
    """A DAG for a sympy expression, reusing `tr`'s original nodes wherever a subexpression matches."""
    memo: dict[Any, Node] = {}

    def go(e: Any) -> Node:
        hit = tr.nodes.get(e)
        if hit is not None:
            return hit
        if e in memo:
            return memo[e]
        node = _build(e, go, tr)
        memo[e] = node
        return node

    return go(expr)


def _number(e: Any, tr: Translation) -> Node:
    if e.is_Integer or e.is_Rational:
        v = Fraction(int(e.p), int(e.q))
        if v < 0:
            return dag.neg(_number(-e, tr))
        hit = tr.consts.get(v)
        if hit is not None:
            return hit
        if v.denominator & (v.denominator - 1) == 0:  # dyadic: exact in binary
            return dag.const(v)
        return dag.div(dag.const(v.numerator), dag.const(v.denominator))
    if e is sp.pi:
        return Node(CONST, value=3.141592653589793, exact="pi")
    if e.is_Float:
        return dag.const(float(e))
    raise Untranslatable(f"number {e}")


def _build(e: Any, go: Callable[[Any], Node], tr: Translation) -> Node:
    if e.is_Number or e is sp.pi:
        return _number(e, tr)
    if e.is_Symbol:
        if e in tr.symbols:
            return tr.symbols[e]
        raise Untranslatable(f"symbol {e}")
    if e.is_Add:
        terms = e.as_ordered_terms()
        pos = [t for t in terms if not t.could_extract_minus_sign()]
        negs = [-t for t in terms if t.could_extract_minus_sign()]
        if not pos:
            return dag.neg(go(sp.Add(*negs, evaluate=False)) if len(negs) > 1 else go(negs[0]))
        acc = go(pos[0])
        for t in pos[1:]:
            acc = dag.add(acc, go(t))
        for t in negs:
            acc = dag.sub(acc, go(t))
        return acc
    if e.is_Mul:
        if e.could_extract_minus_sign():
            return dag.neg(go(-e))
        num, den = sp.fraction(e)
        if den != 1:
            return dag.div(go(num), go(den))
        coeff, rest = e.as_coeff_Mul()
        factors = ([coeff] if coeff != 1 else []) + list(sp.Mul.make_args(rest))
        acc = go(factors[0])
        for f in factors[1:]:
            acc = dag.mul(acc, go(f))
        return acc
    if e.is_Pow:
        base, ex = e.args
        if ex == sp.Rational(1, 2):
            return dag.call("sqrt", go(base))
        if ex == -1:
            return dag.div(dag.const(1), go(base))
        if ex.is_Rational and ex < 0:
            return dag.div(dag.const(1), go(base ** -ex))
        if base is sp.E:
            return dag.call("exp", go(ex))
        if ex.is_Integer or ex.is_Rational:
            return dag.power(go(base), Fraction(int(ex.p), int(ex.q)))
        return dag.op("pow", go(base), go(ex))
    if isinstance(e, sp.exp):
        return dag.call("exp", go(e.args[0]))
    if isinstance(e, sp.log) and len(e.args) == 1:
        return dag.call("log", go(e.args[0]))
    if isinstance(e, sp.Piecewise) and len(e.args) == 2 and e.args[1].cond == sp.true:
        (then, cond), (otherwise, _) = e.args
        if isinstance(cond, (sp.StrictLessThan, sp.StrictGreaterThan)):
            return dag.select(dag.compare(go(cond.lts), "<", go(cond.gts)), go(then), go(otherwise))
        raise Untranslatable(f"condition {type(cond).__name__}")
    if isinstance(e, sp.Abs):
        return dag.call("abs", go(e.args[0]))
    if isinstance(e, (sp.Max, sp.Min)) and len(e.args) == 2:
        kind = "max" if isinstance(e, sp.Max) else "min"
        return dag.call(kind, go(e.args[0]), go(e.args[1]))
    for kind, cls in _NAMED.items():
        if isinstance(e, cls):
            return dag.call(kind, *(go(a) for a in e.args))
    raise Untranslatable(type(e).__name__)


def count_ops(e: Any) -> int:
    return int(sp.count_ops(e))


def is_zero(expr: Any) -> bool:
    """Whether sympy can show `expr` is identically zero (run it under a time budget)."""
    if expr == 0:
        return True
    attempts: tuple[Callable[[Any], Any], ...] = (
        sp.expand, lambda e: sp.simplify(e.rewrite(sp.log)) if e.has(sp.asinh, sp.acosh, sp.atanh) else e,
        sp.simplify)
    for attempt in attempts:
        try:
            if attempt(expr) == 0:
                return True
        except (TypeError, ValueError, NotImplementedError, RecursionError, AttributeError):
            return False
    try:
        return bool(expr.equals(0))
    except (TypeError, ValueError, NotImplementedError, RecursionError, AttributeError):
        return False
