"""Loops: which names a loop carries, which of them stay integers, and the counters' bounds.

A loop-carried name is an input inside the loop and after it (its value depends on the iteration); a
counter (`k = 0` before, `k += 1` inside) and the target of `for … in range(…)`/`enumerate(…)` stay integers.
"""
from __future__ import annotations

import ast
from typing import TYPE_CHECKING

from condhint.expr import Node
from condhint.reading.names import INT_BUILTINS
from condhint.reading.integers import literal_numbers
from condhint.reading.ranges import Constraint, Context, assume_range, range_call
from condhint.site import Interval
from condhint.reading.targets import DEFS, bound_names, target_names

if TYPE_CHECKING:
    from condhint.reading.expressions import Converter
    from condhint.reading.statements import Walker

_INT_OPS = (ast.Add, ast.Sub, ast.Mult, ast.FloorDiv, ast.Mod)


def walk_loop(w: "Walker", scope: str, stmt: ast.For | ast.AsyncFor | ast.While, env: dict[str, Node | None],
              ctx: Context, conv: "Converter") -> None:
    carried = bound_names(stmt.body, w.walrus) | bound_names(stmt.orelse, w.walrus)
    names: list[str] = []
    is_range = False
    if isinstance(stmt, ast.While):
        w.scan(conv, stmt.test)
    else:
        w.scan(conv, stmt.iter)
        is_range = (isinstance(stmt.iter, ast.Call) and isinstance(stmt.iter.func, ast.Name)
                    and stmt.iter.func.id in ("range", "enumerate") and stmt.iter.func.id not in env)
        names = target_names(stmt.target)
        carried |= set(names)
    counters = {name for name in carried if (env.get(name) is not None and env[name].is_int  # type: ignore[union-attr]
                                             and int_valued_in(stmt.body, name, ctx.int_names))}
    for name in carried:
        env[name] = w.input(name, name in counters, like=env.get(name))
    body_ctx = ctx.copy()
    body_ctx.int_names.update(counters)
    if not isinstance(stmt, ast.While) and is_range:
        call = range_call(stmt.iter, env)
        if call is not None:
            body_ctx.int_names.update(names)
            for n in names:
                env[n] = w.input(n, True)
            assume_range(conv, stmt.target, call, body_ctx)
        elif names:  # enumerate: the first target is the index
            body_ctx.int_names.add(names[0])
            env[names[0]] = w.input(names[0], True)
    elif not isinstance(stmt, ast.While) and isinstance(stmt.target, ast.Name) and literal_numbers(stmt.iter):
        values = literal_numbers(stmt.iter) or [0]  # `for k in (1, 2, 4):` an integer in [1, 4]; `[0.1, 3]`
        if all(isinstance(v, int) for v in values):
            body_ctx.int_names.add(stmt.target.id)
            env[stmt.target.id] = w.input(stmt.target.id, True)
        body_ctx.constraints.append(Constraint(stmt.target.id, Interval.of_values(values), None, "range",
                                               stmt.lineno))
    w.block(scope, stmt.body, env, body_ctx)
    w.block(scope, stmt.orelse, env, ctx.copy())
    for name in carried:
        env[name] = w.input(name, name in counters, like=env.get(name))
    ctx.int_names.update(counters)


def _syntactic_int(e: ast.expr, ints: set[str]) -> bool:
    """Whether an expression is integer-valued by its syntax alone (literals, int names, len(), //, %)."""
    if isinstance(e, ast.Constant):
        return isinstance(e.value, int) and not isinstance(e.value, bool)
    if isinstance(e, ast.Name):
        return e.id in ints
    if isinstance(e, ast.BinOp):
        return isinstance(e.op, _INT_OPS) and _syntactic_int(e.left, ints) and _syntactic_int(e.right, ints)
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub):
        return _syntactic_int(e.operand, ints)
    if isinstance(e, ast.Call) and isinstance(e.func, ast.Name):
        return e.func.id in INT_BUILTINS
    return False


def int_valued_in(body: list[ast.stmt], name: str, ints: set[str]) -> bool:
    """Every assignment to `name` in `body` (outside nested functions) gives an integer."""
    known = ints | {name}
    stack: list[ast.AST] = list(body)
    while stack:
        node = stack.pop()
        if isinstance(node, (*DEFS, ast.Lambda)):
            continue
        if isinstance(node, ast.AugAssign) and target_names(node.target) == [name]:
            if not (isinstance(node.op, _INT_OPS) and _syntactic_int(node.value, known)):
                return False
        elif isinstance(node, ast.Assign) and any(name in target_names(t) for t in node.targets):
            if not (len(node.targets) == 1 and isinstance(node.targets[0], ast.Name)
                    and _syntactic_int(node.value, known)):
                return False
        elif isinstance(node, (ast.For, ast.AsyncFor, ast.With, ast.NamedExpr, ast.AnnAssign)) and \
                name in bound_names([node] if isinstance(node, ast.stmt) else []) - bound_names(
                    getattr(node, "body", [])) - bound_names(getattr(node, "orelse", [])):
            return False
        stack.extend(ast.iter_child_nodes(node))
    return True


def comprehension_scope(conv: "Converter", e: ast.ListComp | ast.SetComp | ast.GeneratorExp | ast.DictComp
                        ) -> tuple[dict[str, Node | None], Context]:
    """The environment and context inside a comprehension: its targets are fresh inputs, integers bounded
    by literal bounds when they count over `range(…)`."""
    inner = dict(conv.env)
    ctx = conv.ctx.copy()
    for gen in e.generators:
        conv.w.scan(conv, gen.iter)
        call = range_call(gen.iter, conv.env) if isinstance(gen.target, ast.Name) else None
        for t in target_names(gen.target):
            inner[t] = conv.w.input(t, call is not None)
        if call is not None:
            ctx.int_names.update(target_names(gen.target))
            conv.env, saved = inner, conv.env
            try:
                assume_range(conv, gen.target, call, ctx)
            finally:
                conv.env = saved
    return inner, ctx
