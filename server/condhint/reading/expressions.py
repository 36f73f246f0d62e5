"""Expressions -> DAG nodes, within one scope's environment.

Names bound earlier in the scope are inlined (their nodes are shared, never copied); literals become
constants with their exact text; unknown names, attributes, subscripts and calls become inputs.
"""
from __future__ import annotations

import ast
import math
from typing import TYPE_CHECKING

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, Span
from condhint.numeric.formats import BINARY64, Format
from condhint.reading.arrays import matmul
from condhint.reading.calls import convert_call
from condhint.reading.dtypes import format_limit, in_format, result_format
from condhint.reading.integers import in_context_object
from condhint.reading.loops import comprehension_scope
from condhint.reading.ranges import CMPOPS, Context

if TYPE_CHECKING:
    from condhint.reading.statements import Walker

BINOPS = {ast.Add: "add", ast.Sub: "sub", ast.Mult: "mul", ast.Div: "div", ast.Pow: "pow"}
_OPAQUE_BINOPS = (ast.FloorDiv, ast.Mod, ast.MatMult, ast.BitAnd, ast.BitOr, ast.BitXor, ast.LShift, ast.RShift)
_NAMED = {"pi": math.pi, "e": math.e, "tau": math.tau, "inf": math.inf, "nan": math.nan,
          "euler_gamma": 0.5772156649015329}


class Converter:
    """Expression -> node, within one scope's environment."""

    def __init__(self, walker: "Walker", env: dict[str, Node | None], ctx: Context, scope: str,
                 stmt: ast.stmt | None) -> None:
        self.w = walker
        self.env = env
        self.ctx = ctx
        self.int_names = ctx.int_names
        self.scope = scope
        self.stmt = stmt
        self.scanned: set[int] = set()
        self._memo: dict[int, Node | None] = {}
        self._inputs: dict[str, Node] = walker.scope_inputs(scope)

    def convert(self, expr: ast.expr) -> Node | None:
        key = id(expr)
        if key in self._memo:
            return self._memo[key]
        node = self._convert(expr)
        self._memo[key] = node
        return node

    def leaf(self, expr: ast.expr, is_int: bool = False) -> Node:
        """The input a source text stands for (one node per text in a scope)."""
        text = self.w.source.segment(self.w.source.span(expr))
        node = self._inputs.get(text)
        if node is None:
            node = self.w.input(text, is_int, read=True)
            self._inputs[text] = node
        return node

    def opaque(self, expr: ast.expr, is_int: bool = False) -> Node:
        """An input standing for a value we do not model; numeric parts inside it are still sites."""
        for child in ast.iter_child_nodes(expr):
            if isinstance(child, ast.expr):
                self.w.scan(self, child)
            elif isinstance(child, ast.keyword):
                self.w.scan(self, child.value)
            self.scanned.add(id(child))
        return self.leaf(expr, is_int)

    def node(self, kind: str, args: tuple[Node, ...], expr: ast.expr, is_int: bool = False, *,
             module: str | None = None, within: Format | None = None) -> Node:
        """An operation on `args` written by `expr`, in the format it computes in: `within` (a `dtype=`
        argument or a conversion), else as `module`'s function or Python's operator promotes its operands."""
        span = self.w.source.span(expr)
        operands = [a for a in args if a.kind != COMPARE]
        fmt, weak = (within, False) if within is not None else result_format(tuple(operands), module)
        if fmt is not BINARY64 or any(a.format is not BINARY64 for a in operands):
            args = tuple(a if a.kind == COMPARE else in_format(a, fmt, within is not None) for a in args)
        return Node(kind, args, span=span, is_int=is_int, text=self.w.source.segment(span), format=fmt, weak=weak)

    def compare(self, test: ast.expr) -> Node | None:
        """A single comparison as a COMPARE node, or None."""
        if not (isinstance(test, ast.Compare) and len(test.ops) == 1 and type(test.ops[0]) in CMPOPS):
            return None
        a, b = self.convert(test.left), self.convert(test.comparators[0])
        if a is None or b is None:
            return None
        span = self.w.source.span(test)
        return Node(COMPARE, (a, b), name=CMPOPS[type(test.ops[0])], span=span, text=self.w.source.segment(span))

    def _convert(self, e: ast.expr) -> Node | None:
        if isinstance(e, ast.Constant):
            return self._literal(e)
        if isinstance(e, ast.Name):
            return self._name(e)
        if isinstance(e, ast.Attribute):
            if in_context_object(e):
                return None  # a number of an arithmetic context (mpmath's `ctx`): not binary64
            c = self.w.names.constant(e)
            if c is not None:
                return _named_const(c, self.w.source.span(e), self.w.source.segment(self.w.source.span(e)))
            if e.attr in ("size", "ndim", "shape"):  # integers (a shape is a tuple of them)
                return self.leaf(e, True)
            limit = format_limit(e, self.w.names)
            if limit is not None:  # np.finfo(float).eps: a constant of the format record
                span = self.w.source.span(e)
                return Node(CONST, value=float(limit), exact=f"{limit.numerator}/{limit.denominator}", span=span,
                            text=self.w.source.segment(span))
            return self.leaf(e)
        if isinstance(e, ast.Subscript):
            base = e.value
            # `a.shape[-1]`, and `s[-1]` after `s = a.shape`: integers
            alias = self.env.get(base.id) if isinstance(base, ast.Name) else None
            is_int = (isinstance(base, ast.Attribute) and base.attr == "shape") or (
                alias is not None and alias.is_int and alias.kind == INPUT)
            return self.opaque(e, is_int)
        if isinstance(e, ast.UnaryOp):
            return self._unary(e)
        if isinstance(e, ast.BinOp):
            return self._binary(e)
        if isinstance(e, ast.Call):
            return convert_call(self, e)
        if isinstance(e, ast.IfExp):
            cond = self.compare(e.test)
            a, b = self.convert(e.body), self.convert(e.orelse)
            if a is None or b is None:
                return None
            if cond is None:
                self.w.scan(self, e.test)
                return self.leaf(e)
            return self.node(SELECT, (cond, a, b), e, a.is_int and b.is_int)
        if isinstance(e, ast.NamedExpr):
            node = self.convert(e.value)
            self.env[e.target.id] = node
            return node
        if isinstance(e, ast.Lambda):
            self.w.function(e, f"{self.scope}.<lambda>", self.env)
            self.scanned.add(id(e.body))  # analysed as the lambda's scope: scanning it again is exponential
            return None
        if isinstance(e, (ast.ListComp, ast.SetComp, ast.GeneratorExp, ast.DictComp)):
            self._comprehension(e)
        return None

    def _literal(self, e: ast.Constant) -> Node | None:
        v = e.value
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return None
        text = self.w.source.segment(self.w.source.span(e)).replace("_", "")
        if isinstance(v, int):
            exact = str(v) if abs(v) < 10**400 else text
            value = float(v) if abs(v) < 2**1023 else math.inf
        else:
            exact, value = text if _is_plain_number(text) else repr(v), v
        return Node(CONST, value=value, exact=exact, span=self.w.source.span(e), is_int=isinstance(v, int), text=text)

    def _name(self, e: ast.Name) -> Node | None:
        if e.id in self.env:
            return self.env[e.id]
        if e.id in self.w.names.symbolic:
            return None
        if e.id in self.w.module_constants:
            return self.w.module_constants[e.id]
        c = self.w.names.constant(e)
        if c is not None:
            return _named_const(c, self.w.source.span(e), e.id)
        if e.id in ("True", "False", "None"):
            return None
        return self.leaf(e, e.id in self.int_names)

    def _unary(self, e: ast.UnaryOp) -> Node | None:
        if isinstance(e.op, ast.UAdd):
            return self.convert(e.operand)
        if not isinstance(e.op, ast.USub):
            return None
        a = self.convert(e.operand)
        if a is None:
            return None
        if a.kind == CONST:
            span = self.w.source.span(e)
            return Node(CONST, value=-a.value, exact=_negate_exact(a.exact), span=span,  # type: ignore[operator]
                        is_int=a.is_int, text=self.w.source.segment(span))
        return self.node("neg", (a,), e, a.is_int)

    def _binary(self, e: ast.BinOp) -> Node | None:
        a, b = self.convert(e.left), self.convert(e.right)
        if a is None or b is None:
            return None
        if isinstance(e.op, ast.MatMult) and (dot := matmul(self, e, a, b)) is not None:
            return dot  # `x @ y` of declared vectors (reading/arrays.py)
        if isinstance(e.op, _OPAQUE_BINOPS):
            return self.leaf(e, a.is_int and b.is_int)
        op = BINOPS[type(e.op)]
        is_int = a.is_int and b.is_int and (op in ("add", "sub", "mul") or (op == "pow" and self._non_negative(b)))
        return self.node(op, (a, b), e, is_int)

    def _non_negative(self, n: Node) -> bool:
        """A constant ≥ 0, or an input known to be ≥ 0 here (a `range` counter from 0 up, a guard)."""
        if n.kind == CONST:
            return (n.value or 0) >= 0
        return n.kind == INPUT and any(c.name == n.name and c.interval is not None and c.interval.low >= 0
                                       for c in self.ctx.constraints)

    def _comprehension(self, e: ast.ListComp | ast.SetComp | ast.GeneratorExp | ast.DictComp) -> None:
        inner, ctx = comprehension_scope(self, e)
        sub = Converter(self.w, inner, ctx, self.scope, self.stmt)
        parts = [e.key, e.value] if isinstance(e, ast.DictComp) else [e.elt]
        for gen in e.generators:
            parts.extend(gen.ifs)
        for p in parts:
            self.w.scan(sub, p)
        # Done here: the caller's scan must not walk these again (nested comprehensions were exponential).
        self.scanned.update(id(p) for p in parts)
        self.scanned.update(id(gen.iter) for gen in e.generators)


def _is_plain_number(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False


def _negate_exact(exact: str | None) -> str | None:
    if exact is None:
        return None
    return exact[1:] if exact.startswith("-") else f"-{exact}"


def _named_const(exact: str, span: Span, text: str) -> Node:
    return Node(CONST, value=_NAMED[exact], exact=exact, span=span, text=text)
