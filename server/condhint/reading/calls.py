"""Calls: known functions become operations; other calls are opaque inputs (their arguments are still read)."""
from __future__ import annotations

import ast
from typing import TYPE_CHECKING

from condhint.expr import CONST, INPUT, SELECT, Node
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.formats import BINARY64, Format
from condhint.reading.arrays import NOT_A_REDUCTION, reduction_call
from condhint.reading.dtypes import cast_target, dtype_keyword
from condhint.reading.inline import inline_call
from condhint.reading.integers import in_context_object, makes_object, returns_int
from condhint.reading.names import INT_BUILTINS, literal_number
from condhint.reading.ranges import Constraint
from condhint.site import Interval

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
        conv.ctx.constraints.extend(arange_bound(conv, e, leaf))
        return leaf
    if fid is None and (makes_object(e, set()) or in_context_object(e.func)):
        conv.opaque(e)  # its arguments are still read
        return None  # an object of a class the code does not show to be a float: not analysed
    if fid is None or any(isinstance(a, ast.Starred) for a in e.args) or any(
            k.arg not in _KEYWORDS for k in e.keywords):
        return conv.opaque(e)
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


def arange_bound(conv: "Converter", e: ast.Call, leaf: Node) -> list[Constraint]:
    """`np.arange(n)` holds 0 … n − 1: bounded when n's range is known here (a loop over literal sizes, a guard,
    a declaration), so its elements are not sampled independently of n."""
    name = e.func.attr if isinstance(e.func, ast.Attribute) else getattr(e.func, "id", "")
    if name != "arange" or len(e.args) != 1 or e.keywords:
        return []
    stop = conv.convert(e.args[0])
    if stop is None or stop.kind != INPUT:
        return []
    highs = [c.interval.high for c in conv.ctx.constraints if c.name == stop.name and c.interval is not None]
    declared = conv.ctx.declared.get(stop.name or "")
    if declared is not None:
        highs.append(declared.interval.high)
    finite = [h for h in highs if h != float("inf")]
    if not finite:
        return []
    return [Constraint(leaf.name, Interval(0.0, max(min(finite) - 1.0, 0.0)), None, "range", e.lineno)]
