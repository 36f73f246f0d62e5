"""Calls into the project's own functions, inlined at the call site (read from the text, never imported or run).

Inlined: a top-level `def` of the same module, or of another module of the package reached through
`from … import name` (read from disk by `imported.py`), without decorators, `*args`/`**kwargs`, or a body other
than straight-line assignments to names followed by one `return` of an expression, whose expressions use only its
parameters, its own locals, module constants, known math/numpy functions and other such functions (depth ≤
`MAX_DEPTH`, a function never inside itself). Its parameters are bound to the caller's argument nodes, so the
caller's ranges reach the callee; the callee's own `# condhint:` ranges on its parameters still hold (as
constraints on the caller's inputs, or filters on the argument values). The operations of another file's function
are shown at the call. Methods, closures, and functions with branches, loops or side effects are not inlined:
their calls stay opaque inputs.
"""
from __future__ import annotations

import ast
from dataclasses import dataclass
from typing import TYPE_CHECKING

from condhint.expr import COMPARE, CONST, INPUT, Node, Span, topological
from condhint.reading.imported import imported_functions
from condhint.reading.ranges import Constraint, declared_ranges
from condhint.site import Filter

if TYPE_CHECKING:
    from condhint.reading.expressions import Converter
    from condhint.reading.statements import Walker

MAX_DEPTH = 3  # calls inlined inside inlined calls
MAX_NODES = 200  # operations of one inlined body


@dataclass(frozen=True)
class Call:
    """One inlined call: the function and the line it is called from."""

    function: str
    line: int  # of the call
    defined: int  # line of the `def`


def inlinable(w: "Walker", name: str) -> ast.FunctionDef | None:
    """The module's top-level function `name` when its body can be inlined, else None (cached per walker)."""
    cache = w.inlinable
    if name not in cache:
        defs = [w.index.statement(u) for u in w.index.units[1:] if u.name == name]
        fn = defs[0] if len(defs) == 1 and isinstance(defs[0], ast.FunctionDef) else None
        cache[name] = fn if fn is not None and _plain(w, fn) else None
    return cache[name]


def _plain(w: "Walker", fn: ast.FunctionDef) -> bool:
    a = fn.args
    if fn.decorator_list or a.vararg or a.kwarg or a.posonlyargs or a.kwonlyargs:
        return False
    if any(not isinstance(d, ast.Constant) or not isinstance(d.value, (int, float)) for d in a.defaults):
        return False
    body = list(fn.body)
    if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
        body = body[1:]  # the docstring
    if not body or not isinstance(body[-1], ast.Return) or body[-1].value is None:
        return False
    known = {x.arg for x in a.args}
    for st in body[:-1]:
        if not (isinstance(st, ast.Assign) and len(st.targets) == 1 and isinstance(st.targets[0], ast.Name)):
            return False
        if not _pure(w, st.value, known):
            return False
        known.add(st.targets[0].id)
    return _pure(w, body[-1].value, known)


def _pure(w: "Walker", e: ast.expr, known: set[str]) -> bool:
    """Arithmetic on known names, module constants and calls of known or inlinable functions only."""
    stack: list[ast.AST] = [e]
    while stack:
        sub = stack.pop()
        if isinstance(sub, ast.Call):
            if sub.keywords or any(isinstance(x, ast.Starred) for x in sub.args):
                return False
            if w.names.function(sub.func) is None and not (
                    isinstance(sub.func, ast.Name) and sub.func.id in w.index.definitions):
                return False
            stack.extend(sub.args)
        elif isinstance(sub, (ast.Name, ast.Attribute)):
            if not (isinstance(sub, ast.Name) and (sub.id in known or sub.id in w.module_constants)) and \
                    w.names.constant(sub) is None:
                return False
        elif isinstance(sub, (ast.BinOp, ast.UnaryOp, ast.IfExp, ast.Compare, ast.Constant)) or \
                isinstance(sub, (ast.operator, ast.unaryop, ast.cmpop, ast.expr_context)):
            stack.extend(ast.iter_child_nodes(sub))
        else:
            return False
    return True


def inline_call(conv: "Converter", e: ast.Call) -> Node | None:
    """The value of a call to one of the project's own functions (this module's, or another module's of the
    package through `from … import`), its body inlined; None when it is not inlinable."""
    w = conv.w
    if not isinstance(e.func, ast.Name) or e.func.id in conv.env or len(w.calling) >= MAX_DEPTH:
        return None
    callee, name, label = w, e.func.id, e.func.id
    if name not in w.index.definitions:
        target = imported_functions(w.index).get(name) if w.index.path else None
        other = w.index.read_other(target[0]) if target is not None else None
        if target is None or other is None:
            return None
        callee, name, label = w.foreign(other), target[1], f"{target[0].stem}.{target[1]}"
    if any(c.function == label for c in w.calling):
        return None
    fn = inlinable(callee, name)
    if fn is None or any(isinstance(x, ast.Starred) for x in e.args):
        return None
    params = [x.arg for x in fn.args.args]
    if len(e.args) > len(params) or any(k.arg not in params for k in e.keywords):
        return None
    given: dict[str, ast.expr] = dict(zip(params, e.args))
    given.update({k.arg: k.value for k in e.keywords if k.arg is not None})
    defaults = dict(zip(params[len(params) - len(fn.args.defaults):], fn.args.defaults))
    env: dict[str, Node | None] = {}
    for p in params:
        arg = given.get(p)
        node = conv.convert(arg) if arg is not None else _default(callee, conv, defaults.get(p))
        if node is None:
            return None
        env[p] = node
    return _body(conv, callee, fn, e, env, label)


def _default(callee: "Walker", conv: "Converter", value: ast.expr | None) -> Node | None:
    """A parameter's literal default, read in the callee's module."""
    if value is None:
        return None
    return type(conv)(callee, {}, conv.ctx.copy(), conv.scope, conv.stmt).convert(value)


def _body(conv: "Converter", callee: "Walker", fn: ast.FunctionDef, call: ast.Call, env: dict[str, Node | None],
          label: str) -> Node | None:
    w = conv.w
    comments = callee.index.comment_at
    declared = declared_ranges([c for ln, c in comments.items() if fn.lineno <= ln <= (fn.end_lineno or 0)])
    args = {id(n) for n in env.values() if n is not None}
    w.calling.append(Call(label, call.lineno, fn.lineno))
    try:
        inner = type(conv)(callee, env, conv.ctx.copy(), conv.scope, conv.stmt)  # a Converter for the body
        for st in fn.body[:-1]:
            if isinstance(st, ast.Assign):
                env[st.targets[0].id] = inner.convert(st.value)  # type: ignore[union-attr]
        root = inner.convert(fn.body[-1].value)  # type: ignore[attr-defined, arg-type]
    finally:
        chain = tuple(w.calling)
        w.calling.pop()
    if root is None or len(topological(root)) > MAX_NODES:
        return None
    reach = {id(x) for a in env.values() if a is not None and id(a) in args for x in topological(a)}
    if any(n.kind == INPUT and id(n) not in reach for n in topological(root)):
        return None  # a call inside it could not be inlined (recursion, depth): the whole call stays opaque
    if callee is not w:  # another file: its operations are shown at the call, in this file
        root = _at_call(root, args, w.source.span(call))
    for n in topological(root):
        if id(n) not in args and n.kind not in (INPUT, CONST):
            w.inlined.setdefault(id(n), chain)
    _callee_ranges(conv, declared, env, fn)
    return root


def _at_call(root: Node, keep: set[int], span: Span) -> Node:
    """A copy of the DAG whose nodes (other than the caller's arguments, kept as they are) sit at `span`."""
    new: dict[int, Node] = {}
    for n in topological(root):
        if id(n) in keep:
            new[id(n)] = n
            continue
        new[id(n)] = Node(n.kind, tuple(new[id(a)] for a in n.args), name=n.name, value=n.value, exact=n.exact,
                          span=span, is_int=n.is_int, text=n.text, format=n.format)
    return new[id(root)]


def _callee_ranges(conv: "Converter", declared: dict, env: dict[str, Node | None], fn: ast.FunctionDef) -> None:
    """The callee's declared ranges hold at the call: on the caller's input when an argument is one, else as a
    filter on the argument's value."""
    for name, r in declared.items():
        node = env.get(name)
        if node is None or name not in {x.arg for x in fn.args.args}:
            continue
        source = f"declared in {fn.name}"
        if node.kind == INPUT:
            conv.ctx.constraints.append(Constraint(node.name, r.interval, None, source, fn.lineno))
            continue
        for bound, op in ((r.interval.low, ">" if r.interval.low_open else ">="),
                          (r.interval.high, "<" if r.interval.high_open else "<=")):
            if bound in (float("inf"), float("-inf")):
                continue
            limit = Node(CONST, value=bound, exact=repr(bound), text=repr(bound))
            cmp = Node(COMPARE, (node, limit), name=op, text=f"{node.text} {op} {bound!r}")
            conv.ctx.constraints.append(Constraint(None, None, Filter(cmp, True, fn.lineno), source, fn.lineno))
