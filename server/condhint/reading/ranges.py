"""Where input ranges come from, combined in one place.

Sources, from the most to the least trusted: `# condhint:` comments (declared), asserts, guards and branch
conditions, and the bounds of `range(…)` loops and comprehensions (inferred). Each narrowing is named, so
hover and JSON can say where a range came from; inputs with no source use the configured default.
"""
from __future__ import annotations

import ast
import math
import re
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


def assume_range(conv: "Converter", target: ast.expr, call: ast.Call, ctx: Context) -> None:
    """`for k in range(a, b)` (or a comprehension over it): what holds inside is `a <= k < b` — an interval
    when the bounds are constants (`n = 100` before counts), a filter when they are other values
    (`range(0, i + 1)`: k < i + 1). A negative step gives `a >= k > b`; an unknown step, nothing."""
    if not isinstance(target, ast.Name) or call.keywords or not 1 <= len(call.args) <= 3:
        return
    args = list(call.args)
    nodes = [conv.convert(a) for a in args]
    values = [evaluate_constant(n) if n is not None else None for n in nodes]
    if all(v is not None and float(v).is_integer() for v in values):
        r = range(*(int(v) for v in values))  # type: ignore[arg-type]
        if r:
            ctx.constraints.append(Constraint(target.id, Interval(float(min(r[0], r[-1])), float(max(r[0], r[-1]))),
                                              None, "range", call.lineno))
        return
    start, stop = (ast.copy_location(ast.Constant(0), call), args[0]) if len(args) == 1 else (args[0], args[1])
    step = _int_literal(args[2]) if len(args) == 3 else 1
    if step is None or step == 0:
        return
    name = ast.copy_location(ast.Name(target.id, ast.Load()), target)
    ops: list[ast.cmpop] = [ast.LtE(), ast.Lt()] if step > 0 else [ast.GtE(), ast.Gt()]
    assume(conv, ast.Compare(start, ops, [name, stop]), True, ctx, "range", call.lineno)


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
                if base.source == WEAKEST:  # a default value's scale gives way to what the code says
                    base = InputRange(c.interval, c.source, c.line, base.uncertainty, base.uncertainty_abs, base.is_int)
                else:
                    base = base.narrowed(c.interval, c.source, c.line)
        ranges[n.name] = base
    filters = tuple(c.filter for c in ctx.constraints
                    if c.filter is not None and _inputs_subset(c.filter.condition, ranges))
    return ranges, filters


def _inputs_subset(cond: Node, ranges: dict[str, InputRange]) -> bool:
    return all(n.name in ranges for n in topological(cond) if n.kind == INPUT)


# ---- parameters: default values and docstrings ----------------------------------------------------------
WEAKEST = "parameter default"  # the source every other one overrides
SCALE_DECADES = 2  # a parameter defaulting to d is taken to range over |d|·10⁻² … |d|·10², with d's sign


def parameter_constraints(fn: ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda) -> list[Constraint]:
    """Ranges a function states about its parameters without a `# condhint:` comment: numpydoc parameter lines
    ("alpha : float — 0 < alpha <= 1", "in [0, 1]", "positive", "non-negative"), else the conventional scale
    of a float default value (`alpha=0.7`: within two decades of 0.7, positive)."""
    args = fn.args
    positional = [*args.posonlyargs, *args.args]
    defaults = dict(zip((a.arg for a in positional[len(positional) - len(args.defaults):]), args.defaults))
    defaults.update((a.arg, d) for a, d in zip(args.kwonlyargs, args.kw_defaults) if d is not None)
    names = [a.arg for a in (*positional, *args.kwonlyargs)]
    doc = ast.get_docstring(fn) if not isinstance(fn, ast.Lambda) else None
    stated = docstring_intervals(doc, names) if doc else {}
    out = []
    for name in names:
        if name in stated:
            out.append(Constraint(name, stated[name], None, "docstring", fn.lineno))
            continue
        d = defaults.get(name)
        value = _float_literal(d) if d is not None else None
        if value is not None and value != 0 and math.isfinite(value):
            lo, hi = abs(value) * 10.0**-SCALE_DECADES, abs(value) * 10.0**SCALE_DECADES
            out.append(Constraint(name, Interval(lo, hi) if value > 0 else Interval(-hi, -lo), None,
                                  WEAKEST, fn.lineno))
    return out


def _float_literal(e: ast.expr) -> float | None:
    """The value of a float literal default (`0.7`, `-1e-3`); ints are counts, not scales."""
    sign = 1.0
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub):
        sign, e = -1.0, e.operand
    if isinstance(e, ast.Constant) and isinstance(e.value, float):
        return sign * e.value
    return None


_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_OPS = {"<": ("<", "lt"), "<=": ("<=", "le"), "≤": ("<=", "le"), ">": (">", "gt"), ">=": (">=", "ge"),
        "≥": (">=", "ge")}


def docstring_intervals(doc: str, names: list[str]) -> dict[str, Interval]:
    """Bounds numpydoc parameter descriptions state (a parameter's own lines only)."""
    sections = _parameter_sections(doc, names)
    out: dict[str, Interval] = {}
    for name, text in sections.items():
        found = _interval_in(text, name)
        if found is not None and not found.empty:
            out[name] = found
    return out


_NOT_ONLY_INT = {"float", "floating", "complex", "array_like", "ndarray", "array", "scalar", "number", "real", "Real"}


def docstring_int_names(doc: str | None, names: list[str]) -> set[str]:
    """Parameters whose numpydoc type line says they are integers ("q : int", "n : Optional[int]",
    "order : int, optional"), not "int or float" or "array_like of ints"."""
    out: set[str] = set()
    for line in (doc or "").splitlines():
        head = re.match(r"^(\w+)\s*:(.*)$", line)
        if head and head.group(1) in names:
            words = set(re.findall(r"[A-Za-z_]+", head.group(2)))
            if words & {"int", "integer"} and not words & _NOT_ONLY_INT:
                out.add(head.group(1))
    return out


def _parameter_sections(doc: str, names: list[str]) -> dict[str, str]:
    lines = doc.splitlines()
    out: dict[str, str] = {}
    current = None
    for line in lines:
        head = re.match(r"^(\w+)\s*:", line)
        if head and not line.startswith((" ", "\t")):
            current = head.group(1) if head.group(1) in names else None
            if current is not None:
                out[current] = line[head.end():]
            continue
        if current is not None and (line.startswith((" ", "\t")) or not line.strip()):
            out[current] += " " + line.strip()
        elif line.strip():
            current = None
    return out


def _interval_in(text: str, name: str) -> Interval | None:
    n = re.escape(name)
    ops = "|".join(map(re.escape, _OPS))
    m = re.search(rf"({_NUM})\s*({ops})\s*{n}\s*({ops})\s*({_NUM})", text)
    if m and _OPS[m.group(2)][1] in ("lt", "le") and _OPS[m.group(3)][1] in ("lt", "le"):
        return Interval(float(m.group(1)), float(m.group(4)), m.group(2) == "<", m.group(3) == "<")
    m = re.search(rf"\b{n}\s*({ops})\s*({_NUM})", text)
    if m:
        return interval_of(_AST_OPS[_OPS[m.group(1)][0]](), float(m.group(2)))
    m = re.search(rf"\bin\s*([\[(])\s*({_NUM})\s*,\s*({_NUM})\s*([\])])", text)
    if m:
        return Interval(float(m.group(2)), float(m.group(3)), m.group(1) == "(", m.group(4) == ")")
    lowered = text.lower()
    if re.search(r"\b(non-?negative|>= ?0)\b", lowered):
        return Interval(0.0, math.inf)
    if re.search(r"\b(strictly )?positive\b", lowered):
        return Interval(0.0, math.inf, low_open=True)
    return None


_AST_OPS = {"<": ast.Lt, "<=": ast.LtE, ">": ast.Gt, ">=": ast.GtE}
