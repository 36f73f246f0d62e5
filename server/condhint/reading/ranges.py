"""Where input ranges come from, combined in one place.

Sources, from the most to the least trusted: `# condhint:` comments (declared), asserts, guards and branch
conditions, and the bounds of `range(…)` loops and comprehensions (inferred). Each narrowing is named, so
hover and JSON can say where a range came from; inputs with no source use the configured default.
"""
from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from condhint.expr import COMPARE, INPUT, Node, topological
from condhint.numeric.evaluate import evaluate_constant
from condhint.reading.comments import Clauses, interval_of
from condhint.site import Filter, InputRange, Interval

if TYPE_CHECKING:
    from condhint.reading.expressions import Converter

CMPOPS = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==", ast.NotEq: "!="}
_NEGATE = {ast.Lt: ast.GtE, ast.LtE: ast.Gt, ast.Gt: ast.LtE, ast.GtE: ast.Lt}
_FLIP = {ast.Lt: ast.Gt, ast.LtE: ast.GtE, ast.Gt: ast.Lt, ast.GtE: ast.LtE, ast.Eq: ast.Eq}


@dataclass
class Constraint:
    """Something known to hold at a point of the code: an interval on an input, or a filter on a value."""

    name: str | None
    interval: Interval | None
    filter: Filter | None
    source: str
    line: int


@dataclass
class Context:
    """What holds at a point of a scope: declared ranges, constraints from the code, integer-valued names."""

    declared: dict[str, InputRange]
    constraints: list[Constraint]
    int_names: set[str] = field(default_factory=set)

    def copy(self) -> "Context":
        return Context(self.declared, list(self.constraints), set(self.int_names))


def declared_ranges(clauses: list[Clauses]) -> dict[str, InputRange]:
    """Ranges and uncertainties the scope's comments declare."""
    declared: dict[str, InputRange] = {}
    for c in clauses:
        for var, interval in c.intervals.items():
            prev = declared.get(var)
            declared[var] = InputRange(interval if prev is None else prev.interval.intersect(interval),
                                       "comment", c.line)
        for var, (rel, ab) in c.uncertainty.items():
            prev = declared.get(var) or InputRange(Interval(), "default", c.line)
            declared[var] = InputRange(prev.interval, prev.source, prev.line, rel, ab)
    return declared


# ---- conditions: asserts, guards, branches --------------------------------------------------------------
def assume(conv: "Converter", test: ast.expr, holds: bool, ctx: Context, source: str, line: int) -> None:
    """Record what `test` (being true, or false when `holds` is false) says about inputs and values."""
    if isinstance(test, ast.UnaryOp) and isinstance(test.op, ast.Not):
        assume(conv, test.operand, not holds, ctx, source, line)
        return
    if isinstance(test, ast.BoolOp):
        if isinstance(test.op, ast.And) == holds:  # (a and b) holds, or (a or b) fails: each part
            for v in test.values:
                assume(conv, v, holds, ctx, source, line)
        return
    if not isinstance(test, ast.Compare):
        return
    operands = [test.left, *test.comparators]
    pairs = list(zip(operands, test.ops, operands[1:]))
    if not holds and len(pairs) > 1:
        return  # the negation of a chain is a disjunction: nothing certain per variable
    for left, op, right in pairs:
        if type(op) not in CMPOPS:
            continue
        if not holds:
            neg = _NEGATE.get(type(op))
            if neg is None:
                continue
            op = neg()
        _assume_one(conv, left, op, right, ctx, source, line)


def _assume_one(conv: "Converter", left: ast.expr, op: ast.cmpop, right: ast.expr, ctx: Context,
                source: str, line: int) -> None:
    a, b = conv.convert(left), conv.convert(right)
    if a is None or b is None:
        return
    for var, other, o in ((a, b, op), (b, a, _NEGATE.get(type(op)) and _flip(op))):
        if var.kind == INPUT and o is not None:
            value = evaluate_constant(other)
            if value is not None and not math.isnan(value):
                try:
                    ctx.constraints.append(Constraint(var.name, interval_of(o, value), None, source, line))
                except ValueError:
                    pass
                return
    cmp = Node(COMPARE, (a, b), name=CMPOPS[type(op)], text=f"{a.text} {CMPOPS[type(op)]} {b.text}")
    ctx.constraints.append(Constraint(None, None, Filter(cmp, True, line), source, line))


def _flip(op: ast.cmpop) -> ast.cmpop | None:
    f = _FLIP.get(type(op))
    return f() if f else None


# ---- loop bounds ----------------------------------------------------------------------------------------
def range_call(e: ast.expr, env: dict[str, Node | None]) -> ast.Call | None:
    """`e` if it calls the builtin `range`, else None."""
    if isinstance(e, ast.Call) and isinstance(e.func, ast.Name) and e.func.id == "range" and "range" not in env:
        return e
    return None


def range_constraint(target: ast.expr, call: ast.Call) -> list[Constraint]:
    """`for k in range(1, 10)`: k in [1, 9], when the bounds are integer literals and the target one name."""
    bounds = _range_bounds(call)
    if bounds is None or not isinstance(target, ast.Name):
        return []
    return [Constraint(target.id, Interval(*bounds), None, "range", call.lineno)]


def _range_bounds(call: ast.Call) -> tuple[float, float] | None:
    """The smallest and largest values of `range(…)` with integer literal arguments, or None."""
    vals = [_int_literal(a) for a in call.args]
    if call.keywords or not 1 <= len(vals) <= 3 or any(v is None for v in vals):
        return None
    items = range(*vals) if vals[-1] != 0 or len(vals) < 3 else range(0)  # type: ignore[arg-type]
    return (float(min(items[0], items[-1])), float(max(items[0], items[-1]))) if items else None


def _int_literal(e: ast.expr) -> int | None:
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub):
        v = _int_literal(e.operand)
        return None if v is None else -v
    if isinstance(e, ast.Constant) and isinstance(e.value, int) and not isinstance(e.value, bool):
        return e.value
    return None


# ---- combined, for one site -----------------------------------------------------------------------------
def site_ranges(nodes: list[Node], ctx: Context) -> tuple[dict[str, InputRange], tuple[Filter, ...]]:
    """Each input's range (declared, then narrowed by every constraint on it, in order) and the filters on
    computed values that apply to the site's nodes."""
    ranges: dict[str, InputRange] = {}
    for n in nodes:
        if n.kind != INPUT or n.name is None:
            continue
        r = ctx.declared.get(n.name)
        base = r if r is not None else InputRange(Interval(), "default", None)
        if n.is_int:
            base = InputRange(base.interval, base.source, base.line, base.uncertainty, base.uncertainty_abs, True)
        for c in ctx.constraints:
            if c.name == n.name and c.interval is not None:
                base = base.narrowed(c.interval, c.source, c.line)
        ranges[n.name] = base
    filters = tuple(c.filter for c in ctx.constraints
                    if c.filter is not None and _inputs_subset(c.filter.condition, ranges))
    return ranges, filters


def _inputs_subset(cond: Node, ranges: dict[str, InputRange]) -> bool:
    return all(n.name in ranges for n in topological(cond) if n.kind == INPUT)
