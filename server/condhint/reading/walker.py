"""The statement walker: Python `ast` -> sites.

Within a function (and at module level) single assignments are inlined forward so a formula written over
several statements is one site; sharing is kept. Guards, asserts and branches narrow input ranges.
Nothing is executed: the walker only reads the syntax tree.
"""
from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field
from typing import Iterable, Iterator

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, Span, topological
from condhint.numeric.functions import FUNCTIONS
from condhint.reading.comments import Clauses, interval_of
from condhint.reading.names import INT_BUILTINS, Names, literal_number
from condhint.reading.source import Source
from condhint.site import Binding, Filter, InputRange, Interval, Site

_BINOPS = {ast.Add: "add", ast.Sub: "sub", ast.Mult: "mul", ast.Div: "div", ast.Pow: "pow"}
_CMPOPS = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==", ast.NotEq: "!="}
_NEGATE = {ast.Lt: ast.GtE, ast.LtE: ast.Gt, ast.Gt: ast.LtE, ast.GtE: ast.Lt}
_OPAQUE_BINOPS = (ast.FloorDiv, ast.Mod, ast.MatMult, ast.BitAnd, ast.BitOr, ast.BitXor, ast.LShift, ast.RShift)
_FUNCS = (ast.FunctionDef, ast.AsyncFunctionDef)


@dataclass
class Constraint:
    """Something known to hold at a point of the code: an interval on an input, or a filter on a value."""

    name: str | None
    interval: Interval | None
    filter: Filter | None
    source: str
    line: int


@dataclass
class ScopeInfo:
    name: str
    clauses: list[Clauses] = field(default_factory=list)


class Walker:
    def __init__(self, source: Source, tree: ast.Module, comments: list[Clauses], max_nodes: int = 400) -> None:
        self.source = source
        self.tree = tree
        self.names = Names.of_module(tree)
        self.max_nodes = max_nodes
        self.sites: list[Site] = []
        self.problems: list[tuple[Span, str]] = []  # parts that could not be read (too deep, …)
        self._comment_lines = {c.line: c for c in comments}
        self._claimed: set[int] = set()
        self._bindings: dict[int, Binding] = {}
        self._opaque: dict[str, dict[str, Node]] = {}
        self.module_constants: dict[str, Node] = {}
        self.walrus = ":=" in source.text  # otherwise no expression binds a name

    # ---- scopes -------------------------------------------------------------------------------------------
    def run(self) -> list[Site]:
        self.module_constants = self._module_constants()
        module_clauses = self._scope_clauses(self.tree.body, [])
        self._scope("<module>", self.tree.body, params={}, clauses=module_clauses, outer_env={})
        # A value inlined into a later site is analysed there, where its error matters; its own site would
        # only repeat that work (and report losses the consumer does not feel).
        inner: set[int] = set()
        for site in self.sites:
            inner.update(id(n) for n in topological(site.root)[:-1])
        self.sites = [s for s in self.sites if id(s.root) not in inner]
        return self.sites

    def _module_constants(self) -> dict[str, Node]:
        counts: dict[str, int] = {}
        values: dict[str, ast.expr] = {}
        symbolic: set[str] = set()
        for stmt in self.tree.body:
            if isinstance(stmt, ast.Assign) and self.names.not_binary64(stmt.value):
                symbolic.update(n for t in stmt.targets for n in _target_names(t))
                continue
            for target, value in _assignments(stmt):
                counts[target] = counts.get(target, 0) + 1
                values[target] = value
        # Names bound only to sympy or mpmath objects at module level are not binary64 in any function either.
        self.names.symbolic.update(symbolic - set(counts))
        for node in ast.walk(self.tree):
            if isinstance(node, (ast.Global, ast.Nonlocal)):
                for n in node.names:
                    counts[n] = 2
        consts: dict[str, Node] = {}
        for name, value in values.items():
            if counts.get(name) != 1 or value is None:
                continue
            conv = _Converter(self, dict(consts), _Context({}, []), "<module>", None)
            try:
                node = conv.convert(value)
            except RecursionError:
                continue
            if node is not None and node.kind != INPUT and not any(n.kind == INPUT for n in topological(node)):
                consts[name] = node
        return consts

    def _scope_clauses(self, body: list[ast.stmt], extra_lines: Iterable[int]) -> list[Clauses]:
        """Comments that belong to this scope: inside its body, outside nested functions, or on given lines."""
        if not self._comment_lines:
            return []
        lines = set(extra_lines)
        nested: list[tuple[int, int]] = []
        for stmt in body:
            for node in ast.walk(stmt):
                if isinstance(node, _FUNCS):
                    nested.append((node.lineno, node.end_lineno or node.lineno))
        if body:
            first = min([getattr(body[0], "lineno", 1), *(d.lineno for d in getattr(body[0], "decorator_list", []))])
            last = max(getattr(s, "end_lineno", 1) or 1 for s in body)
            lines.update(range(first, last + 1))
        out = []
        for line in sorted(lines):
            c = self._comment_lines.get(line)
            if c is None or line in self._claimed or any(a <= line <= b for a, b in nested):
                continue
            self._claimed.add(line)
            out.append(c)
        return out

    def _scope(self, name: str, body: list[ast.stmt], params: dict[str, Node], clauses: list[Clauses],
               outer_env: dict[str, Node | None]) -> None:
        declared: dict[str, InputRange] = {}
        for c in clauses:
            for var, interval in c.intervals.items():
                prev = declared.get(var)
                declared[var] = InputRange(interval if prev is None else prev.interval.intersect(interval),
                                           "comment", c.line)
            for var, (rel, ab) in c.uncertainty.items():
                prev = declared.get(var) or InputRange(Interval(), "default", c.line)
                declared[var] = InputRange(prev.interval, prev.source, prev.line, rel, ab)
        env: dict[str, Node | None] = {**outer_env, **params}
        ctx = _Context(declared=declared, constraints=[])
        self._block(name, body, env, ctx)

    def _function(self, fn: ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda, qual: str,
                  outer_env: dict[str, Node | None]) -> None:
        params: dict[str, Node] = {}
        args = fn.args
        for a in [*args.posonlyargs, *args.args, *args.kwonlyargs]:
            is_int = isinstance(a.annotation, ast.Name) and a.annotation.id == "int"
            params[a.arg] = Node(INPUT, name=a.arg, is_int=is_int, text=a.arg)
        for a in (args.vararg, args.kwarg):
            if a is not None:
                params[a.arg] = Node(INPUT, name=a.arg, text=a.arg)
        if isinstance(fn, ast.Lambda):
            body: list[ast.stmt] = [ast.Return(fn.body, lineno=fn.body.lineno, col_offset=fn.body.col_offset,
                                               end_lineno=fn.body.end_lineno, end_col_offset=fn.body.end_col_offset)]
            clauses = self._scope_clauses([], [fn.lineno])
        else:
            body = fn.body
            head = range(fn.lineno, (fn.body[0].lineno if fn.body else fn.lineno) + 1)
            clauses = self._scope_clauses(fn.body, head)
        # Names the function rebinds are its own; the rest of the enclosing scope stays visible.
        own = _bound_names(body, self.walrus)
        env = {k: v for k, v in outer_env.items() if k not in own}
        self._scope(qual, body, params, clauses, env)

    # ---- statements -----------------------------------------------------------------------------------------
    def _block(self, scope: str, body: list[ast.stmt], env: dict[str, Node | None], ctx: "_Context") -> None:
        for stmt in body:
            try:
                self._statement(scope, stmt, env, ctx)
            except RecursionError:
                self.problems.append((self.source.span(stmt), "the statement is nested too deeply to analyse"))
                for target in _bound_names([stmt], self.walrus):
                    env[target] = Node(INPUT, name=target, text=target)

    def _statement(self, scope: str, stmt: ast.stmt, env: dict[str, Node | None], ctx: "_Context") -> None:
        conv = _Converter(self, env, ctx, scope, stmt)
        if isinstance(stmt, _FUNCS):
            for d in stmt.decorator_list:
                self._scan(conv, d)
            # Module-level names other than constants may be rebound before the function runs: inputs then.
            self._function(stmt, stmt.name if scope == "<module>" else f"{scope}.{stmt.name}",
                           {} if scope == "<module>" else env)
            env[stmt.name] = None
            return
        if isinstance(stmt, ast.ClassDef):
            for sub in stmt.body:
                if isinstance(sub, _FUNCS):
                    self._function(sub, f"{stmt.name}.{sub.name}", {} if scope == "<module>" else dict(env))
            return
        if isinstance(stmt, (ast.Assign, ast.AnnAssign, ast.AugAssign)):
            self._assign(scope, stmt, env, ctx, conv)
            return
        if isinstance(stmt, ast.If):
            self._if(scope, stmt, env, ctx, conv)
            return
        if isinstance(stmt, ast.Assert):
            self._scan(conv, stmt.test)
            self._assume(conv, stmt.test, True, ctx, "assert", stmt.lineno)
            return
        if isinstance(stmt, (ast.For, ast.AsyncFor, ast.While)):
            self._loop(scope, stmt, env, ctx, conv)
            return
        if isinstance(stmt, (ast.With, ast.AsyncWith)):
            for item in stmt.items:
                self._scan(conv, item.context_expr)
                for t in _target_names(item.optional_vars):
                    env[t] = Node(INPUT, name=t, text=t)
            self._block(scope, stmt.body, env, ctx)
            return
        if isinstance(stmt, ast.Try) or type(stmt).__name__ == "TryStar":
            for part in (stmt.body, *(h.body for h in stmt.handlers), stmt.orelse, stmt.finalbody):  # type: ignore[attr-defined]
                self._block(scope, part, env, ctx.copy())
            for t in _bound_names([stmt], self.walrus):
                env[t] = Node(INPUT, name=t, text=t)
            return
        if isinstance(stmt, (ast.Global, ast.Nonlocal)):
            for n in stmt.names:
                env[n] = Node(INPUT, name=n, text=n)
            return
        if isinstance(stmt, ast.Match):
            self._scan(conv, stmt.subject)
            for case in stmt.cases:
                self._block(scope, case.body, dict(env), ctx.copy())
            for t in _bound_names([stmt], self.walrus):
                env[t] = Node(INPUT, name=t, text=t)
            return
        for child in ast.iter_child_nodes(stmt):
            if isinstance(child, ast.expr):
                self._scan(conv, child)

    def _assign(self, scope: str, stmt: ast.Assign | ast.AnnAssign | ast.AugAssign, env: dict[str, Node | None],
                ctx: "_Context", conv: "_Converter") -> None:
        if isinstance(stmt, ast.AugAssign):
            if isinstance(stmt.target, ast.Name) and type(stmt.op) in _BINOPS:
                current = env.get(stmt.target.id)
                if stmt.target.id not in env:
                    current = conv.convert(stmt.target)
                value = conv.convert(stmt.value)
                if current is not None and value is not None:
                    op = _BINOPS[type(stmt.op)]
                    is_int = current.is_int and value.is_int and op in ("add", "sub", "mul")
                    node = Node(op, (current, value), span=self.source.span(stmt), is_int=is_int,
                                text=self.source.segment(self.source.span(stmt)))
                    self._site(node, conv)
                    self._bind(stmt.target.id, node, stmt, env, ctx)
                    return
            self._scan(conv, stmt.value)
            for t in _target_names(stmt.target):
                env[t] = Node(INPUT, name=t, text=t)
            return
        value = stmt.value
        targets = stmt.targets if isinstance(stmt, ast.Assign) else [stmt.target]
        if value is None:
            return
        if (len(targets) == 1 and isinstance(targets[0], (ast.Tuple, ast.List)) and isinstance(value, (ast.Tuple, ast.List))
                and len(targets[0].elts) == len(value.elts)
                and not any(isinstance(e, ast.Starred) for e in (*targets[0].elts, *value.elts))):
            # `a, b = x + 1, y * 2`: each name is bound to its own value (all evaluated before binding).
            nodes = [self._scan(conv, v) for v in value.elts]
            for t, n in zip(targets[0].elts, nodes):
                if isinstance(t, ast.Name):
                    self._bind(t.id, n, stmt, env, ctx)
                else:
                    for name in _target_names(t):
                        env[name] = Node(INPUT, name=name, text=name)
            return
        if self.names.not_binary64(value):
            for target in targets:
                for t in _target_names(target):
                    env[t] = None  # sympy or mpmath objects, not binary64 numbers
            return
        node = self._scan(conv, value)
        if isinstance(stmt, ast.AnnAssign) and isinstance(stmt.annotation, ast.Name) and stmt.annotation.id == "int":
            ctx.int_names.add(_target_names(stmt.target)[0] if _target_names(stmt.target) else "")
        for target in targets:
            if isinstance(target, ast.Name):
                if node is not None and node.kind == INPUT and not node.is_int and not isinstance(value, ast.Name):
                    # An opaque value (unknown call, subscript): name the input after the variable.
                    node = Node(INPUT, name=target.id, text=target.id, is_int=node.is_int)
                self._bind(target.id, node, stmt, env, ctx)
            else:
                shape = isinstance(value, ast.Attribute) and value.attr == "shape"  # `n, m = a.shape`
                for t in _target_names(target):
                    env[t] = Node(INPUT, name=t, text=t, is_int=shape)
                    if shape:
                        ctx.int_names.add(t)

    def _bind(self, name: str, node: Node | None, stmt: ast.stmt, env: dict[str, Node | None], ctx: "_Context") -> None:
        if node is not None and node.kind not in (INPUT, CONST):
            if len(topological(node)) > self.max_nodes:
                node = Node(INPUT, name=name, text=name)  # keep sites bounded: a long chain is cut here
            else:
                self._bindings[id(node)] = Binding(name, stmt.lineno, self.source.span(stmt))
        env[name] = node
        if node is not None and node.is_int:
            ctx.int_names.add(name)
        else:
            ctx.int_names.discard(name)

    def _if(self, scope: str, stmt: ast.If, env: dict[str, Node | None], ctx: "_Context", conv: "_Converter") -> None:
        self._scan(conv, stmt.test)
        exits = _exits(stmt.body)
        body_ctx, else_ctx = ctx.copy(), ctx.copy()
        self._assume(conv, stmt.test, True, body_ctx, "branch", stmt.lineno)
        self._assume(conv, stmt.test, False, else_ctx, "branch", stmt.lineno)
        body_env, else_env = dict(env), dict(env)
        self._block(scope, stmt.body, body_env, body_ctx)
        self._block(scope, stmt.orelse, else_env, else_ctx)
        if exits and not stmt.orelse:
            # A guard: after `if bad: raise/return`, the opposite holds.
            self._assume(conv, stmt.test, False, ctx, "guard", stmt.lineno)
            env.update(else_env)
            return
        if exits and not _exits(stmt.orelse):
            env.update(else_env)
            ctx.constraints = else_ctx.constraints
            return
        if _exits(stmt.orelse) and not exits:
            env.update(body_env)
            ctx.constraints = body_ctx.constraints
            return
        for name in _bound_names(stmt.body, self.walrus) | _bound_names(stmt.orelse, self.walrus):
            a, b = body_env.get(name), else_env.get(name)
            env[name] = a if a is b else Node(INPUT, name=name, text=name)

    def _loop(self, scope: str, stmt: ast.For | ast.AsyncFor | ast.While, env: dict[str, Node | None],
              ctx: "_Context", conv: "_Converter") -> None:
        carried = _bound_names(stmt.body, self.walrus) | _bound_names(stmt.orelse, self.walrus)
        if isinstance(stmt, ast.While):
            self._scan(conv, stmt.test)
        else:
            self._scan(conv, stmt.iter)
            is_range = (isinstance(stmt.iter, ast.Call) and isinstance(stmt.iter.func, ast.Name)
                        and stmt.iter.func.id in ("range", "enumerate") and stmt.iter.func.id not in env)
            names = _target_names(stmt.target)
            carried |= set(names)
        # A counter (`k = 0` before the loop, `k += 1` inside) stays an integer across iterations.
        counters = {name for name in carried if (env.get(name) is not None and env[name].is_int  # type: ignore[union-attr]
                                                 and _int_valued_in(stmt.body, name, ctx.int_names))}
        for name in carried:
            env[name] = Node(INPUT, name=name, text=name, is_int=name in counters)
        body_ctx = ctx.copy()
        body_ctx.int_names.update(counters)
        if not isinstance(stmt, ast.While) and is_range:
            call = _range_call(stmt.iter, env)
            if call is not None:
                body_ctx.int_names.update(names)
                for n in names:
                    env[n] = Node(INPUT, name=n, text=n, is_int=True)
                body_ctx.constraints.extend(_range_constraint(stmt.target, call))
            elif names:
                body_ctx.int_names.add(names[0])
                env[names[0]] = Node(INPUT, name=names[0], text=names[0], is_int=True)
        self._block(scope, stmt.body, env, body_ctx)
        self._block(scope, stmt.orelse, env, ctx.copy())
        for name in carried:
            env[name] = Node(INPUT, name=name, text=name, is_int=name in counters)
        ctx.int_names.update(counters)

    # ---- conditions -----------------------------------------------------------------------------------------
    def _assume(self, conv: "_Converter", test: ast.expr, holds: bool, ctx: "_Context", source: str, line: int) -> None:
        if isinstance(test, ast.UnaryOp) and isinstance(test.op, ast.Not):
            self._assume(conv, test.operand, not holds, ctx, source, line)
            return
        if isinstance(test, ast.BoolOp):
            conj = isinstance(test.op, ast.And) == holds  # (a and b) holds, or (a or b) fails: each part
            if conj:
                for v in test.values:
                    self._assume(conv, v, holds, ctx, source, line)
            return
        if not isinstance(test, ast.Compare):
            return
        operands = [test.left, *test.comparators]
        pairs = list(zip(operands, test.ops, operands[1:]))
        if not holds and len(pairs) > 1:
            return  # the negation of a chain is a disjunction: nothing certain per variable
        for left, op, right in pairs:
            if type(op) not in _CMPOPS:
                continue
            if not holds:
                neg = _NEGATE.get(type(op))
                if neg is None:
                    continue
                op = neg()
            self._assume_one(conv, left, op, right, ctx, source, line)

    def _assume_one(self, conv: "_Converter", left: ast.expr, op: ast.cmpop, right: ast.expr, ctx: "_Context",
                    source: str, line: int) -> None:
        a, b = conv.convert(left), conv.convert(right)
        if a is None or b is None:
            return
        for var, other, o in ((a, b, op), (b, a, _NEGATE.get(type(op)) and _flip(op))):
            if var.kind == INPUT and o is not None:
                value = const_value(other)
                if value is not None and not math.isnan(value):
                    try:
                        ctx.constraints.append(Constraint(var.name, interval_of(o, value), None, source, line))
                    except ValueError:
                        pass
                    return
        cmp = Node(COMPARE, (a, b), name=_CMPOPS[type(op)], text=f"{a.text} {_CMPOPS[type(op)]} {b.text}")
        ctx.constraints.append(Constraint(None, None, Filter(cmp, True, line), source, line))

    # ---- sites ----------------------------------------------------------------------------------------------
    def _scan(self, conv: "_Converter", expr: ast.expr) -> Node | None:
        """Convert an expression, making sites of its maximal numeric parts; returns its node."""
        node = conv.convert(expr)
        if node is not None and node.kind not in (INPUT, CONST, COMPARE):
            self._site(node, conv)
        elif node is None or node.kind == COMPARE:
            for child in ast.iter_child_nodes(expr):
                if isinstance(child, ast.expr) and id(child) not in conv.scanned:
                    self._scan(conv, child)
                elif isinstance(child, ast.keyword):
                    self._scan(conv, child.value)
                elif isinstance(child, ast.comprehension) and id(child.iter) not in conv.scanned:
                    self._scan(conv, child.iter)
        conv.scanned.add(id(expr))
        return node

    def _site(self, root: Node, conv: "_Converter") -> None:
        if root.is_int or root.span is None or conv.stmt is None:
            return
        ctx, stmt, scope = conv.ctx, conv.stmt, conv.scope
        nodes = topological(root)
        if not any(FUNCTIONS.get(n.kind) is not None and FUNCTIONS[n.kind].rounds for n in nodes):
            return
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
        ids = {id(n) for n in nodes}
        filters = tuple(c.filter for c in ctx.constraints if c.filter is not None
                        and all(id(x) in ids or x.kind in (INPUT, CONST) for x in topological(c.filter.condition)
                                if x.kind == INPUT) and _inputs_subset(c.filter.condition, ranges))
        bindings = {id(n): self._bindings[id(n)] for n in nodes if id(n) in self._bindings}
        self.sites.append(Site(root=root, scope=scope, span=root.span, statement_line=stmt.lineno, ranges=ranges,
                               filters=filters, bindings=tuple(sorted(set(bindings.values()), key=lambda b: b.line)),
                               bindings_by_node=bindings))


def _inputs_subset(cond: Node, ranges: dict[str, InputRange]) -> bool:
    return all(n.name in ranges for n in topological(cond) if n.kind == INPUT)


def _flip(op: ast.cmpop) -> ast.cmpop | None:
    flips = {ast.Lt: ast.Gt, ast.LtE: ast.GtE, ast.Gt: ast.Lt, ast.GtE: ast.LtE, ast.Eq: ast.Eq}
    f = flips.get(type(op))
    return f() if f else None


@dataclass
class _Context:
    declared: dict[str, InputRange]
    constraints: list[Constraint]
    int_names: set[str] = field(default_factory=set)

    def copy(self) -> "_Context":
        return _Context(self.declared, list(self.constraints), set(self.int_names))


class _Converter:
    """Expression -> node, within one scope's environment."""

    def __init__(self, walker: Walker, env: dict[str, Node | None], ctx: _Context, scope: str,
                 stmt: ast.stmt | None) -> None:
        self.w = walker
        self.env = env
        self.ctx = ctx
        self.int_names = ctx.int_names
        self.scope = scope
        self.stmt = stmt
        self.scanned: set[int] = set()
        self._memo: dict[int, Node | None] = {}
        self._inputs: dict[str, Node] = walker._opaque.setdefault(scope, {})

    def convert(self, expr: ast.expr) -> Node | None:
        key = id(expr)
        if key in self._memo:
            return self._memo[key]
        node = self._convert(expr)
        self._memo[key] = node
        return node

    def _leaf(self, expr: ast.expr, is_int: bool = False) -> Node:
        text = self.w.source.segment(self.w.source.span(expr))
        node = self._inputs.get(text)
        if node is None:
            node = Node(INPUT, name=text, text=text, is_int=is_int)
            self._inputs[text] = node
        return node

    def _opaque(self, expr: ast.expr, is_int: bool = False) -> Node:
        """An input standing for a value we do not model; numeric parts inside it are still sites."""
        for child in ast.iter_child_nodes(expr):
            if isinstance(child, ast.expr):
                self.w._scan(self, child)
            elif isinstance(child, ast.keyword):
                self.w._scan(self, child.value)
            self.scanned.add(id(child))
        return self._leaf(expr, is_int)

    def _node(self, kind: str, args: tuple[Node, ...], expr: ast.expr, is_int: bool = False) -> Node:
        span = self.w.source.span(expr)
        return Node(kind, args, span=span, is_int=is_int, text=self.w.source.segment(span))

    def _convert(self, e: ast.expr) -> Node | None:
        if isinstance(e, ast.Constant):
            v = e.value
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                return None
            text = self.w.source.segment(self.w.source.span(e)).replace("_", "")
            if isinstance(v, int):
                exact = str(v) if abs(v) < 10**400 else text
                value = float(v) if abs(v) < 2**1023 else math.inf
            else:
                exact, value = text if _is_plain_number(text) else repr(v), v
            return Node(CONST, value=value, exact=exact, span=self.w.source.span(e), is_int=isinstance(v, int),
                        text=text)
        if isinstance(e, ast.Name):
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
            return self._leaf(e, e.id in self.int_names)
        if isinstance(e, ast.Attribute):
            c = self.w.names.constant(e)
            if c is not None:
                return _named_const(c, self.w.source.span(e), self.w.source.segment(self.w.source.span(e)))
            if e.attr in ("size", "ndim", "shape"):  # integers (a shape is a tuple of them)
                return self._leaf(e, True)
            return self._leaf(e)
        if isinstance(e, ast.Subscript):
            base = e.value
            # `a.shape[-1]`, and `s[-1]` after `s = a.shape`: integers
            alias = self.env.get(base.id) if isinstance(base, ast.Name) else None
            is_int = (isinstance(base, ast.Attribute) and base.attr == "shape") or (
                alias is not None and alias.is_int and alias.kind == INPUT)
            return self._opaque(e, is_int)
        if isinstance(e, ast.UnaryOp):
            if isinstance(e.op, ast.UAdd):
                return self.convert(e.operand)
            if isinstance(e.op, ast.USub):
                a = self.convert(e.operand)
                if a is None:
                    return None
                if a.kind == CONST:
                    return Node(CONST, value=-a.value, exact=_negate_exact(a.exact), span=self.w.source.span(e),  # type: ignore[operator]
                                is_int=a.is_int, text=self.w.source.segment(self.w.source.span(e)))
                return self._node("neg", (a,), e, a.is_int)
            return None
        if isinstance(e, ast.BinOp):
            if isinstance(e.op, _OPAQUE_BINOPS):
                a, b = self.convert(e.left), self.convert(e.right)
                if a is None or b is None:
                    return None
                return self._leaf(e, a.is_int and b.is_int)
            a, b = self.convert(e.left), self.convert(e.right)
            if a is None or b is None:
                return None
            op = _BINOPS[type(e.op)]
            is_int = a.is_int and b.is_int and (op in ("add", "sub", "mul") or (op == "pow" and self._non_negative(b)))
            return self._node(op, (a, b), e, is_int)
        if isinstance(e, ast.Call):
            return self._call(e)
        if isinstance(e, ast.IfExp):
            cond = self._compare(e.test)
            a, b = self.convert(e.body), self.convert(e.orelse)
            if a is None or b is None:
                return None
            if cond is None:
                self.w._scan(self, e.test)
                return self._leaf(e)
            return self._node(SELECT, (cond, a, b), e, a.is_int and b.is_int)
        if isinstance(e, ast.NamedExpr):
            node = self.convert(e.value)
            self.env[e.target.id] = node
            return node
        if isinstance(e, (ast.Lambda,)):
            self.w._function(e, f"{self.scope}.<lambda>", self.env)
            self.scanned.add(id(e.body))  # analysed as the lambda's scope: scanning it again is exponential
            return None
        if isinstance(e, (ast.ListComp, ast.SetComp, ast.GeneratorExp, ast.DictComp)):
            self._comprehension(e)
            return None
        return None

    def _non_negative(self, n: Node) -> bool:
        """A constant ≥ 0, or an input known to be ≥ 0 here (a `range` counter from 0 up, a guard)."""
        if n.kind == CONST:
            return (n.value or 0) >= 0
        return n.kind == INPUT and any(c.name == n.name and c.interval is not None and c.interval.low >= 0
                                       for c in self.ctx.constraints)

    def _comprehension(self, e: ast.ListComp | ast.SetComp | ast.GeneratorExp | ast.DictComp) -> None:
        inner = dict(self.env)
        ctx = self.ctx.copy()
        for gen in e.generators:
            self.w._scan(self, gen.iter)
            call = _range_call(gen.iter, self.env) if isinstance(gen.target, ast.Name) else None
            for t in _target_names(gen.target):
                inner[t] = Node(INPUT, name=t, text=t, is_int=call is not None)
            if call is not None:  # `[… for j in range(1, n)]`: j is an integer, bounded when the bounds are literals
                ctx.int_names.update(_target_names(gen.target))
                ctx.constraints.extend(_range_constraint(gen.target, call))
        sub = _Converter(self.w, inner, ctx, self.scope, self.stmt)
        parts = [e.key, e.value] if isinstance(e, ast.DictComp) else [e.elt]
        for gen in e.generators:
            parts.extend(gen.ifs)
        for p in parts:
            self.w._scan(sub, p)
        # Done here: the caller's scan must not walk these again (nested comprehensions were exponential).
        self.scanned.update(id(p) for p in parts)
        self.scanned.update(id(gen.iter) for gen in e.generators)

    def _compare(self, test: ast.expr) -> Node | None:
        if not (isinstance(test, ast.Compare) and len(test.ops) == 1 and type(test.ops[0]) in _CMPOPS):
            return None
        a, b = self.convert(test.left), self.convert(test.comparators[0])
        if a is None or b is None:
            return None
        return self._node(COMPARE, (a, b), test) if False else Node(
            COMPARE, (a, b), name=_CMPOPS[type(test.ops[0])], span=self.w.source.span(test),
            text=self.w.source.segment(self.w.source.span(test)))

    def _call(self, e: ast.Call) -> Node | None:
        if self.w.names.not_binary64(e):
            return None  # a sympy or mpmath object: the expression is not binary64 arithmetic
        if self.w.names.makes_number(e):
            exact = literal_number(e.args[0]) or ""
            span = self.w.source.span(e)
            return Node(CONST, value=float(exact), exact=exact, span=span, text=self.w.source.segment(span))
        fid = self.w.names.function(e.func)
        if isinstance(e.func, ast.Name) and e.func.id in INT_BUILTINS and e.func.id not in self.env:
            return self._opaque(e, True)
        if fid is None or any(isinstance(a, ast.Starred) for a in e.args) or any(
                k.arg not in ("dtype", "out", "where") for k in e.keywords):
            return self._opaque(e)
        args = [self.convert(a) for a in e.args[1:]] if fid == "where" else [self.convert(a) for a in e.args]
        if any(a is None for a in args) or not args:
            return self._opaque(e)
        if fid == "where":
            args = [None, *args]
        nodes: list[Node] = args  # type: ignore[assignment]
        if fid == "where":  # np.where(cond, a, b): piecewise, like `a if cond else b`
            cond = self._compare(e.args[0]) if len(e.args) == 3 else None
            if cond is None:
                return self._opaque(e)
            return self._node(SELECT, (cond, nodes[1], nodes[2]), e, nodes[1].is_int and nodes[2].is_int)
        if fid == "float":
            return nodes[0] if len(nodes) == 1 else self._opaque(e)
        if fid == "log" and len(nodes) == 2:  # log(x, base) = log(x) / log(base)
            span = self.w.source.span(e)
            lx = Node("log", (nodes[0],), span=span, text=self.w.source.segment(span))
            lb = Node("log", (nodes[1],), span=span, text=f"log({nodes[1].text})")
            return self._node("div", (lx, lb), e)
        fn = FUNCTIONS[fid]
        if fid in ("min", "max", "hypot") and len(nodes) > 2:
            acc = nodes[0]
            for n in nodes[1:]:
                acc = self._node(fid, (acc, n), e)
            return acc
        if len(nodes) != fn.arity:
            return self._opaque(e)
        is_int = fid in ("abs", "min", "max") and all(n.is_int for n in nodes)
        return self._node(fid, tuple(nodes), e, is_int)


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
    values = {"pi": math.pi, "e": math.e, "tau": math.tau, "inf": math.inf, "nan": math.nan,
              "euler_gamma": 0.5772156649015329}
    return Node(CONST, value=values[exact], exact=exact, span=span, text=text)


def const_value(node: Node) -> float | None:
    """The binary64 value of a node without inputs (our own evaluator: nothing of the user's runs)."""
    from condhint.numeric.evaluate import evaluate_constant

    return evaluate_constant(node)


def _assignments(stmt: ast.stmt) -> Iterator[tuple[str, ast.expr | None]]:
    if isinstance(stmt, ast.Assign):
        for t in stmt.targets:
            if isinstance(t, ast.Name):
                yield t.id, stmt.value
            else:
                for n in _target_names(t):
                    yield n, None
                    yield n, None
    elif isinstance(stmt, ast.AnnAssign) and isinstance(stmt.target, ast.Name):
        yield stmt.target.id, stmt.value
    elif isinstance(stmt, ast.AugAssign):
        for n in _target_names(stmt.target):
            yield n, None
            yield n, None
    elif isinstance(stmt, (ast.If, ast.For, ast.While, ast.With, ast.Try)):
        for n in _bound_names([stmt]):
            yield n, None
            yield n, None


def _target_names(target: ast.expr | None) -> list[str]:
    if target is None:
        return []
    if isinstance(target, ast.Name):
        return [target.id]
    if isinstance(target, (ast.Tuple, ast.List)):
        return [n for t in target.elts for n in _target_names(t)]
    if isinstance(target, ast.Starred):
        return _target_names(target.value)
    return []


def _bound_names(body: list[ast.stmt], walrus: bool = True) -> set[str]:
    """Names a block may bind (not descending into nested functions or classes). Without `walrus` (the
    source has no `:=`) expressions bind nothing and are not searched."""
    out: set[str] = set()
    stack: list[ast.AST] = list(body)
    while stack:
        node = stack.pop()
        if not walrus and isinstance(node, ast.expr):
            continue
        if isinstance(node, (ast.Assign,)):
            for t in node.targets:
                out.update(_target_names(t))
        elif isinstance(node, (ast.AnnAssign, ast.AugAssign)):
            out.update(_target_names(node.target))
        elif isinstance(node, (ast.For, ast.AsyncFor)):
            out.update(_target_names(node.target))
        elif isinstance(node, ast.NamedExpr):
            out.add(node.target.id)
        elif isinstance(node, (ast.With, ast.AsyncWith)):
            for item in node.items:
                out.update(_target_names(item.optional_vars))
        elif isinstance(node, ast.ExceptHandler) and node.name:
            out.add(node.name)
        elif isinstance(node, (*_FUNCS, ast.ClassDef)):
            out.add(node.name)
            continue
        elif isinstance(node, (ast.Import, ast.ImportFrom)):
            for a in node.names:
                out.add((a.asname or a.name).split(".")[0])
        elif isinstance(node, ast.Lambda):
            continue
        stack.extend(ast.iter_child_nodes(node))
    return out


_INT_OPS = (ast.Add, ast.Sub, ast.Mult, ast.FloorDiv, ast.Mod)


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


def _int_valued_in(body: list[ast.stmt], name: str, ints: set[str]) -> bool:
    """Every assignment to `name` in `body` (outside nested functions) gives an integer."""
    known = ints | {name}
    stack: list[ast.AST] = list(body)
    while stack:
        node = stack.pop()
        if isinstance(node, (*_FUNCS, ast.ClassDef, ast.Lambda)):
            continue
        if isinstance(node, ast.AugAssign) and _target_names(node.target) == [name]:
            if not (isinstance(node.op, _INT_OPS) and _syntactic_int(node.value, known)):
                return False
        elif isinstance(node, ast.Assign) and any(name in _target_names(t) for t in node.targets):
            if not (len(node.targets) == 1 and isinstance(node.targets[0], ast.Name)
                    and _syntactic_int(node.value, known)):
                return False
        elif isinstance(node, (ast.For, ast.AsyncFor, ast.With, ast.NamedExpr, ast.AnnAssign)) and \
                name in _bound_names([node] if isinstance(node, ast.stmt) else []) - _bound_names(
                    getattr(node, "body", [])) - _bound_names(getattr(node, "orelse", [])):
            return False
        stack.extend(ast.iter_child_nodes(node))
    return True


def _range_call(e: ast.expr, env: dict[str, Node | None]) -> ast.Call | None:
    """`e` if it calls the builtin `range`, else None."""
    if isinstance(e, ast.Call) and isinstance(e.func, ast.Name) and e.func.id == "range" and "range" not in env:
        return e
    return None


def _range_constraint(target: ast.expr, call: ast.Call) -> list[Constraint]:
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


def _exits(body: list[ast.stmt]) -> bool:
    return bool(body) and isinstance(body[-1], (ast.Return, ast.Raise, ast.Continue, ast.Break))
