"""Calls: known functions become operations; other calls are opaque inputs (their arguments are still read)."""
from __future__ import annotations

import ast
import math
from typing import TYPE_CHECKING

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node
from condhint.numeric.evaluate import evaluate_constant
from condhint.numeric.formats import BINARY64, Format
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.sampling import LITERAL
from condhint.reading.arrays import NOT_A_REDUCTION, reduction_call
from condhint.reading.dtypes import cast_target, dtype_keyword
from condhint.reading.inline import inline_call
from condhint.reading.integers import in_context_object, literal_numbers, makes_object, returns_int
from condhint.reading.names import INT_BUILTINS, literal_number
from condhint.reading.ranges import Constraint
from condhint.site import Filter, Interval

if TYPE_CHECKING:
    from condhint.reading.expressions import Converter

_KEYWORDS = ("dtype",)  # keywords that do not change the value of an elementwise call (`out=`, `where=` do)


def convert_call(conv: "Converter", e: ast.Call) -> Node | None:
    names, source = conv.w.names, conv.w.source
    if names.not_binary64(e):
        return None  # a sympy or mpmath object: the expression is not binary64 arithmetic
    reduced = reduction_call(conv, e)  # arrays: np.sum(x), x.mean(), np.linalg.norm(x)… (reading/arrays.py)
    if reduced is not NOT_A_REDUCTION:
        return reduced  # type: ignore[return-value]
    if names.makes_number(e):
        exact = literal_number(e.args[0]) or ""
        span = source.span(e)
        return Node(CONST, value=float(exact), exact=exact, span=span, text=source.segment(span))
    cast = cast_target(e, names)
    if cast is not None and cast[0] is not BINARY64:
        return _converted(conv, e, *cast)
    fid = names.function(e.func)
    if fid is None and isinstance(e.func, ast.Name) and (e.func.id in conv.w.index.definitions or conv.w.index.path):
        inlined = inline_call(conv, e)  # one of the project's own functions (`inline.py`)
        if inlined is not None:
            return inlined
    if isinstance(e.func, ast.Name) and e.func.id in INT_BUILTINS and e.func.id not in conv.env:
        return conv.opaque(e, e.func.id != "round" or returns_int(e))  # round(x, 2) is a float
    if fid is None and returns_int(e):
        leaf = conv.opaque(e, True)
        conv.ctx.constraints.extend(call_bounds(conv, e, leaf))
        return leaf
    if fid is None and (makes_object(e, set()) or in_context_object(e.func)):
        conv.opaque(e)  # its arguments are still read
        return None  # an object of a class the code does not show to be a float: not analysed
    if fid is None or any(isinstance(a, ast.Starred) for a in e.args) or any(
            k.arg not in _KEYWORDS for k in e.keywords):
        leaf = conv.opaque(e)
        if fid is None:
            conv.ctx.constraints.extend(call_bounds(conv, e, leaf))
        return leaf
    if fid == "where":  # np.where(cond, a, b): piecewise, like `a if cond else b`
        return _where(conv, e)
    nodes = [conv.convert(a) for a in e.args]
    if not nodes or any(a is None for a in nodes):
        return conv.opaque(e)
    args: list[Node] = nodes  # type: ignore[assignment]
    if fid == "float":  # np.float64(x), float(x): x itself, in binary64
        if len(args) != 1:
            return conv.opaque(e)
        x = args[0]
        numpy_value = names.module_of_call(e.func) == "numpy" and x.weak and conv.w.mixed_formats
        if x.format is BINARY64 and not numpy_value:
            return x
        return conv.node("cast", (x,), e, within=BINARY64)  # widened exactly, or a numpy float64 (not weak)
    if fid == "log" and len(args) == 2:  # log(x, base) = log(x) / log(base)
        span = source.span(e)
        lx = Node("log", (args[0],), span=span, text=source.segment(span))
        lb = Node("log", (args[1],), span=span, text=f"log({args[1].text})")
        return conv.node("div", (lx, lb), e)
    op = OPERATIONS[fid]
    if op.signature.folds and len(args) > 2:  # folded pairwise, left to right
        acc = args[0]
        for n in args[1:]:
            acc = conv.node(fid, (acc, n), e, module=names.module_of_call(e.func))
        return acc
    if len(args) != op.arity:
        return conv.opaque(e)
    return conv.node(fid, tuple(args), e, op.keeps_integers and all(n.is_int for n in args),
                     module=names.module_of_call(e.func), within=dtype_keyword(e, names))


def _converted(conv: "Converter", e: ast.Call, fmt: Format, value: ast.expr) -> Node | None:
    """A conversion to a narrower format: of a literal, the literal rounded; of a value, a conversion node."""
    v = conv.convert(value)
    if v is None:
        return conv.opaque(e)
    span = conv.w.source.span(e)
    if v.kind == CONST and v.value is not None:
        return Node(CONST, value=float(fmt.round([v.value])[0]), exact=v.exact, span=span, is_int=False,
                    text=conv.w.source.segment(span), format=fmt, weak=False)
    return conv.node("cast", (v,), e, within=fmt)


def _where(conv: "Converter", e: ast.Call) -> Node | None:
    branches = [conv.convert(a) for a in e.args[1:]]
    if not branches or any(a is None for a in branches):
        return conv.opaque(e)
    cond = conv.compare(e.args[0]) if len(e.args) == 3 else None
    if cond is None:
        return conv.opaque(e)
    a, b = branches  # type: ignore[misc]
    return conv.node(SELECT, (cond, a, b), e, a.is_int and b.is_int)


def call_bounds(conv: "Converter", e: ast.Call, leaf: Node) -> list[Constraint]:
    """Values the code builds from numbers it states: `np.arange(3, 20)` (3 … 19), `np.arange(1, m + 1)` after
    `m = 20`, `np.linspace(0, 2 * np.pi, n)`, `np.array([0.1, 0.2, 5])`. `np.arange(n)` holds 0 … n − 1: below
    n (a filter, so its elements are not sampled independently of n) and bounded when n's range is known here."""
    name = e.func.attr if isinstance(e.func, ast.Attribute) else getattr(e.func, "id", "")
    if leaf.kind != INPUT or leaf.name is None or (e.keywords and name != "linspace"):
        return []
    if name in ("array", "asarray") and len(e.args) == 1:
        values = literal_numbers(e.args[0])
        return [Constraint(leaf.name, Interval.of_values(values), None, LITERAL, e.lineno)] if values else []
    if name not in ("arange", "linspace") or not 1 <= len(e.args) <= 3:
        return []
    nodes = [conv.convert(a) for a in e.args]
    consts = [evaluate_constant(n) if n is not None else None for n in nodes]
    if name == "linspace":
        a, b = consts[0], consts[1] if len(consts) > 1 else None
        return [] if a is None or b is None else [
            Constraint(leaf.name, Interval(min(a, b), max(a, b)), None, LITERAL, e.lineno)]
    if all(c is not None for c in consts):
        start, stop, step = (0.0, consts[0], 1.0) if len(consts) == 1 else (
            consts[0], consts[1], consts[2] if len(consts) == 3 else 1.0)
        if not step or (stop - start) / step <= 0:  # type: ignore[operator]
            return []
        last = start + (math.ceil((stop - start) / step) - 1) * step  # type: ignore[operator]
        return [Constraint(leaf.name, Interval(min(start, last), max(start, last)), None, LITERAL, e.lineno)]
    stop = nodes[0]
    if len(e.args) != 1 or stop is None or stop.kind != INPUT:
        return []
    below = Node(COMPARE, (leaf, stop), name="<", text=f"{leaf.text} < {stop.text}")
    out = [Constraint(None, None, Filter(below, True, e.lineno), "range", e.lineno),
           Constraint(leaf.name, Interval(0.0), None, "range", e.lineno)]
    highs = [c.interval.high for c in conv.ctx.constraints if c.name == stop.name and c.interval is not None]
    declared = conv.ctx.declared.get(stop.name or "")
    if declared is not None:
        highs.append(declared.interval.high)
    finite = [h for h in highs if h != math.inf]
    if finite:
        out.append(Constraint(leaf.name, Interval(0.0, max(min(finite) - 1.0, 0.0)), None, "range", e.lineno))
    return out
