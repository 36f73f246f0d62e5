"""A `for` loop read as a recurrence (`s += term`, `t += dt`, `p *= x`, `x = a * x + b`, `a, b = b, a + b`).

Read only when the body is straight-line arithmetic on names (assignments, augmented assignments, tuple
assignments; calls whose result is unused, such as `out.append(t)`, are allowed) and the trip count is known:
`range(…)` bounds that are literals, constants or names with a range (declared, guarded, asserted), or
`for x in xs` / `xs[i]` with a declared `len(xs) in [lo, hi]`. Anything else (branches, `break`, nested loops,
unknown calls, `while` loops, whose trip count depends on the values) is left as before: loop-carried names are
fresh inputs. Nothing is executed.
"""
from __future__ import annotations

import ast
import math
from typing import TYPE_CHECKING

from condhint.expr import INPUT, Node, topological
from condhint.numeric.evaluate import evaluate_constant
from condhint.reading.expressions import BINOPS, Converter
from condhint.reading.ranges import Context, range_call, site_ranges
from condhint.reading.targets import target_names
from condhint.recurrence import Carried, Recurrence
from condhint.site import InputRange

if TYPE_CHECKING:
    from condhint.reading.statements import Walker

_UNARY = (ast.USub, ast.UAdd)


def read_recurrence(w: "Walker", scope: str, stmt: ast.For, env: dict[str, Node | None], ctx: Context
                    ) -> Recurrence | None:
    if stmt.orelse or not isinstance(stmt.target, ast.Name):
        return None
    assigned = _assigned(stmt.body)
    if assigned is None or not assigned:
        return None
    head = Converter(w, dict(env), ctx, scope, stmt)
    counter, elements, arrays = None, {}, set()
    start, stride = 0, 1
    call = range_call(stmt.iter, env)
    target = stmt.target.id
    if call is not None:
        bounds = _range_bounds(head, call, ctx)
        if bounds is None:
            return None
        start, stop, stride = bounds
        trips, counter = len(range(start, stop, stride)), target
        how = w.source.segment(w.source.span(stmt.iter))
    elif isinstance(stmt.iter, ast.Name) and stmt.iter.id not in assigned:
        trips_ = _declared_length(stmt.iter.id, ctx)
        if trips_ is None:
            return None
        trips, how = trips_, f"the declared len({stmt.iter.id})"
        elements[target] = stmt.iter.id
    else:
        return None
    if target in assigned or trips < 1:
        return None
    step_env: dict[str, Node | None] = dict(env)
    initial: dict[str, Node] = {}
    for name in sorted(assigned):
        before = env.get(name)
        if before is not None:
            initial[name] = before
            step_env[name] = Node(INPUT, name=name, text=name, is_int=before.is_int)
    step_env[target] = Node(INPUT, name=target, text=target, is_int=counter is not None)
    last: dict[str, ast.stmt] = {}
    for st in stmt.body:
        if not _step(w, scope, st, step_env, ctx, counter, assigned, elements, arrays):
            return None
        for name in _bound(st):
            last[name] = st
    # A name the body binds without a value before the loop must be written before it is read in a step.
    fresh = assigned - set(initial)
    for name in initial:
        node = step_env.get(name)
        if node is not None and any(n.kind == INPUT and n.name in fresh for n in topological(node)):
            return None
    carried = []
    for name, init in initial.items():
        node = step_env.get(name)
        if node is None:
            return None
        span = w.source.span(last[name])
        carried.append(Carried(name, init, node, span, w.source.segment(span),
                               is_int=init.is_int and node.is_int))
    if not carried:
        return None
    roots = [n for c in carried for n in (c.initial, c.update)]
    nodes = [n for r in roots for n in topological(r)]
    ranges, _ = site_ranges(nodes, ctx)
    for name, array in elements.items():
        ranges[name] = _element_range(array, ctx)
    iterated = stmt.iter.id if isinstance(stmt.iter, ast.Name) else None
    span = w.source.span(stmt)
    return Recurrence(tuple(carried), trips, how, span, scope, counter, start, stride,
                      tuple(sorted(elements)), ranges, iterated,
                      replaceable=len(stmt.body) == 1 and not _used_outside(w, stmt, target),
                      lines=tuple(w.source.lines[span.line - 1:span.end_line]), names=_names_of_unit(w, stmt))


def _names_of_unit(w: "Walker", loop: ast.For) -> frozenset[str]:
    unit = w.index.unit_at(loop.lineno)
    tree: ast.AST = w.index.statement(unit) or w.index.tree
    return frozenset(n.id for n in ast.walk(tree) if isinstance(n, ast.Name)) | frozenset(
        a.arg for a in ast.walk(tree) if isinstance(a, ast.arg))


def _used_outside(w: "Walker", loop: ast.For, name: str) -> bool:
    """Whether `name` appears in the loop's unit outside the loop (a loop's target stays bound after it)."""
    unit = w.index.unit_at(loop.lineno)
    tree: ast.AST = w.index.statement(unit) or w.index.tree
    end = loop.end_lineno or loop.lineno
    return any(isinstance(n, ast.Name) and n.id == name and not loop.lineno <= n.lineno <= end
               for n in ast.walk(tree))


def _assigned(body: list[ast.stmt]) -> set[str] | None:
    """Names the body binds, or None when it is not straight-line code on names."""
    out: set[str] = set()
    for st in body:
        if isinstance(st, ast.Pass):
            continue
        if isinstance(st, ast.Expr):
            if isinstance(st.value, ast.Constant) or (isinstance(st.value, ast.Call) and not any(
                    isinstance(n, ast.NamedExpr) for n in ast.walk(st.value))):
                continue
            return None
        if isinstance(st, (ast.Assign, ast.AnnAssign, ast.AugAssign)):
            out |= _bound(st)
            continue
        return None
    return out


def _bound(st: ast.stmt) -> set[str]:
    if isinstance(st, ast.Assign):
        return {n for t in st.targets if isinstance(t, (ast.Name, ast.Tuple, ast.List)) for n in target_names(t)}
    if isinstance(st, (ast.AnnAssign, ast.AugAssign)) and isinstance(st.target, ast.Name):
        return {st.target.id}
    return set()


def _step(w: "Walker", scope: str, st: ast.stmt, env: dict[str, Node | None], ctx: Context, counter: str | None,
          assigned: set[str], elements: dict[str, str], arrays: set[str]) -> bool:
    """Apply one statement of the body to the step's environment; False when it is not arithmetic we model."""
    if isinstance(st, (ast.Pass, ast.Expr)):
        return True
    conv = Converter(w, env, ctx, scope, st)
    value = st.value
    if value is None:
        return False
    if isinstance(st, ast.AugAssign):
        if not isinstance(st.target, ast.Name) or type(st.op) not in BINOPS:
            return False
        node = _convert(w, conv, value, counter, assigned, elements)
        current = env.get(st.target.id)
        if node is None or current is None:
            return False
        span = w.source.span(st)
        op = BINOPS[type(st.op)]
        env[st.target.id] = Node(op, (current, node), span=span, text=w.source.segment(span),
                                 is_int=current.is_int and node.is_int and op in ("add", "sub", "mul"))
        return True
    targets = st.targets if isinstance(st, ast.Assign) else [st.target]
    if len(targets) != 1:
        return False
    t = targets[0]
    if isinstance(t, (ast.Subscript, ast.Attribute)):  # `a[i] = t`: stores, binds no name
        return _convert(w, conv, value, counter, assigned, elements) is not None
    if isinstance(t, ast.Name):
        node = _convert(w, conv, value, counter, assigned, elements)
        if node is None:
            return False
        env[t.id] = node
        return True
    if isinstance(t, (ast.Tuple, ast.List)) and isinstance(value, (ast.Tuple, ast.List)) and \
            len(t.elts) == len(value.elts) and all(isinstance(e, ast.Name) for e in t.elts):
        nodes = [_convert(w, conv, v, counter, assigned, elements) for v in value.elts]
        if any(n is None for n in nodes):
            return False
        for e, n in zip(t.elts, nodes):
            env[e.id] = n  # type: ignore[attr-defined]
        return True
    return False


def _convert(w: "Walker", conv: Converter, e: ast.expr, counter: str | None, assigned: set[str],
             elements: dict[str, str]) -> Node | None:
    """An arithmetic expression of the body as a node; None for anything else (unknown calls, attributes that
    are not constants, subscripts other than `xs[i]` of an array the loop does not rebind)."""
    for sub in ast.walk(e):
        if isinstance(sub, ast.Call):
            if w.names.function(sub.func) in (None, "where") or sub.keywords or any(
                    isinstance(a, ast.Starred) for a in sub.args):
                return None
        elif isinstance(sub, ast.Subscript):
            if not (counter is not None and isinstance(sub.value, ast.Name) and isinstance(sub.slice, ast.Name)
                    and sub.slice.id == counter and sub.value.id not in assigned):
                return None
            elements[w.source.segment(w.source.span(sub))] = sub.value.id
        elif isinstance(sub, ast.BinOp) and type(sub.op) not in BINOPS:
            return None
        elif isinstance(sub, ast.UnaryOp) and not isinstance(sub.op, _UNARY):
            return None
        elif isinstance(sub, (ast.Lambda, ast.NamedExpr, ast.IfExp, ast.Compare, ast.BoolOp, ast.ListComp,
                              ast.SetComp, ast.DictComp, ast.GeneratorExp, ast.Await, ast.Starred)):
            return None
    try:
        return conv.convert(e)
    except RecursionError:
        return None


def _range_bounds(conv: Converter, call: ast.Call, ctx: Context) -> tuple[int, int, int] | None:
    """(start, stop, stride) giving the most trips the code allows, or None when a bound is not known."""
    if call.keywords or not 1 <= len(call.args) <= 3:
        return None
    args = list(call.args)
    stride = _bound_value(conv, args[2], ctx, None) if len(args) == 3 else 1.0
    if stride is None or stride == 0 or stride != int(stride):
        return None
    up = stride > 0
    start = _bound_value(conv, args[0], ctx, not up) if len(args) > 1 else 0.0
    stop = _bound_value(conv, args[-1] if len(args) > 1 else args[0], ctx, up)
    if start is None or stop is None:
        return None
    return int(start), int(math.ceil(stop)) if up else int(math.floor(stop)), int(stride)


def _bound_value(conv: Converter, e: ast.expr, ctx: Context, high: bool | None) -> float | None:
    """A bound's value: a constant, else the high (or low) end of the name's finite range; None if unknown.
    Only literals, names, arithmetic and `len(name)` are read (nothing that would make sites of its own)."""
    for sub in ast.walk(e):
        if isinstance(sub, ast.Call) and not (isinstance(sub.func, ast.Name) and sub.func.id == "len"
                                              and len(sub.args) == 1 and isinstance(sub.args[0], ast.Name)):
            return None
        if isinstance(sub, (ast.Subscript, ast.Attribute, ast.Lambda, ast.NamedExpr, ast.IfExp)):
            return None
    node = conv.convert(e)
    if node is None:
        return None
    value = evaluate_constant(node)
    if value is not None:
        return value if math.isfinite(value) else None
    if high is None or node.kind != INPUT:
        return None
    r = site_ranges([node], ctx)[0].get(node.name or "")
    if r is None or r.source == "default":
        return None
    v = r.interval.high if high else r.interval.low
    return v if math.isfinite(v) and abs(v) < 2**53 else None


def _declared_length(array: str, ctx: Context) -> int | None:
    r = ctx.declared.get(f"len({array})")
    if r is None or not math.isfinite(r.interval.high):
        return None
    return int(r.interval.high)


def _element_range(array: str, ctx: Context) -> InputRange:
    """A range declared (or inferred) on an array applies to its elements."""
    probe = Node(INPUT, name=array, text=array)
    return site_ranges([probe], ctx)[0][array]
