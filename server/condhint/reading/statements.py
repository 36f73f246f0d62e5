"""The statement walker: one unit of a module (its module-level code, or one top-level definition) -> sites.

Within a function (and at module level) single assignments are inlined forward so a formula written over
several statements is one site; sharing is kept. Guards, asserts and branches narrow input ranges (see
`ranges`), loops are read by `loops`, calls by `calls`, expressions by `expressions`. Nothing is executed.
"""
from __future__ import annotations

import ast
import bisect
from typing import TYPE_CHECKING, Iterable

from condhint.expr import CONST, INPUT, Node, Span, topological
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.formats import BINARY64, Format, promote
from condhint.numeric.reductions import REDUCTIONS
from condhint.reading.arrays import array_inputs, integer_array_annotation
from condhint.reading.comments import Clauses
from condhint.reading.dtypes import format_of_annotation
from condhint.reading.integers import int_annotation, int_default, used_as_integers
from condhint.reading.expressions import BINOPS, Converter
from condhint.reading.inline import Call
from condhint.reading.loops import walk_loop
from condhint.reading.ranges import (Constraint, Context, assume, declared_ranges, docstring_int_names,
                                     parameter_constraints, site_ranges)
from condhint.reading.recurrences import read_recurrence
from condhint.reading.targets import FUNCS, assignments, bound_names, exits, target_names
from condhint.recurrence import Recurrence
from condhint.site import Binding, Site

if TYPE_CHECKING:
    from condhint.reading.module_index import ModuleIndex, Unit

MODULE = "<module>"


class Walker:
    """Reads one unit of a module into sites; `problems` lists the parts it could not read."""

    def __init__(self, index: "ModuleIndex", max_nodes: int = 400, default_format: Format = BINARY64) -> None:
        self.index = index
        self.source = index.source
        self.names = index.names
        self.module_constants = index.constants
        self.walrus = index.walrus
        self.max_nodes = max_nodes
        self.default_format = default_format  # of values whose type the code does not show
        # Whether formats can mix here: else every value is binary64 and a Python float's weakness never matters.
        self.mixed_formats = default_format is not BINARY64 or index.mentions_reduced_formats
        self.sites: list[Site] = []
        self.problems: list[tuple[Span, str]] = []  # parts that could not be read (too deep, …)
        self._comment_lines = index.comment_at
        self._claimed: set[int] = set()
        self._bindings: dict[int, Binding] = {}
        self.line = 0  # the line of the statement being read
        self._held_after: dict[int, int] = {}  # input -> the line after whose assignments it holds its name's value
        self._inputs: dict[str, dict[str, Node]] = {}
        self.recurrences: list[Recurrence] = []  # loops read as recurrences (`reading/recurrences.py`)
        # calls into the module's own functions (`reading/inline.py`): which are inlinable, the chain of calls
        # being inlined, and the chain each inlined operation came through
        self.inlinable: dict[str, ast.FunctionDef | None] = {}
        self.calling: list[Call] = []
        self.inlined: dict[int, tuple[Call, ...]] = {}
        self._foreign: dict[str, Walker] = {}

    def foreign(self, index: "ModuleIndex") -> "Walker":
        """A walker over another module of the package, sharing this one's chain of calls being inlined."""
        w = self._foreign.get(index.path)
        if w is None or w.index is not index:
            w = self._foreign[index.path] = Walker(index, self.max_nodes)
            w.calling = self.calling
        return w

    # ---- units and scopes -------------------------------------------------------------------------------
    def walk(self, unit: "Unit") -> list[Site]:
        stmt = self.index.statement(unit)
        if unit.is_module:
            body = self.index.tree.body
            self._scope(MODULE, body, {}, self._scope_clauses(body, []), {})
        elif isinstance(stmt, ast.ClassDef):
            self._class(stmt, MODULE, {})
        elif isinstance(stmt, FUNCS):
            self.function(stmt, stmt.name, {})
        # A value inlined into a later site is analysed there, where its error matters; its own site would
        # only repeat that work (and report losses the consumer does not feel).
        inner: set[int] = set()
        for site in self.sites:
            inner.update(id(n) for n in topological(site.root)[:-1])
        self.sites = [s for s in self.sites if id(s.root) not in inner]
        return self.sites

    def input(self, name: str, is_int: bool = False, like: Node | None = None, fmt: Format | None = None, *,
              read: bool = False) -> Node:
        """An input: in the format of the value it stands for (`like`), a stated one (`fmt`), or the default
        (binary64 Python floats unless configured otherwise). It holds the value its name has after the
        statement being read binds it, or (`read`: a value only read there) before that statement."""
        if like is not None and fmt is None:
            node = Node(INPUT, name=name, text=name, is_int=is_int, format=like.format, weak=like.weak)
        else:
            weak = fmt is None and self.default_format is BINARY64  # a Python float
            node = Node(INPUT, name=name, text=name, is_int=is_int, format=fmt or self.default_format, weak=weak)
        self._held_after[id(node)] = self.line - 1 if read else self.line
        return node

    def scope_inputs(self, scope: str) -> dict[str, Node]:
        """The inputs of a scope by source text, shared by all its expressions."""
        return self._inputs.setdefault(scope, {})

    def _scope_clauses(self, body: list[ast.stmt], extra_lines: Iterable[int]) -> list[Clauses]:
        """Comments that belong to this scope: inside its body, outside nested functions, or on given lines."""
        if not self._comment_lines:
            return []
        extra = set(extra_lines)
        first, last = 1, 0
        if body:
            first = min([getattr(body[0], "lineno", 1), *(d.lineno for d in getattr(body[0], "decorator_list", []))])
            last = max(getattr(s, "end_lineno", 1) or 1 for s in body)
        span = range(first, last + 1)
        candidates = (extra | set(span)) if len(span) < len(self._comment_lines) else \
            {ln for ln in self._comment_lines if first <= ln <= last or ln in extra}
        lines = sorted(ln for ln in candidates if ln in self._comment_lines and ln not in self._claimed)
        if not lines:
            return []
        nested = _union(sorted((node.lineno, node.end_lineno or node.lineno)
                               for stmt in body for node in ast.walk(stmt) if isinstance(node, FUNCS)))
        starts = [a for a, _ in nested]
        out = []
        for line in lines:
            k = bisect.bisect_right(starts, line) - 1
            if k >= 0 and line <= nested[k][1]:
                continue  # inside a nested function: its own scope's
            self._claimed.add(line)
            out.append(self._comment_lines[line])
        return out

    def _scope(self, name: str, body: list[ast.stmt], params: dict[str, Node], clauses: list[Clauses],
               outer_env: dict[str, Node | None], stated: list[Constraint] | tuple[Constraint, ...] = ()) -> None:
        env: dict[str, Node | None] = {**outer_env, **params}
        declared = declared_ranges(clauses)
        ctx = Context(declared, [c for c in stated if c.name not in declared or declared[c.name].source == "default"])
        self.block(name, body, env, ctx)

    def function(self, fn: ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda, qual: str,
                 outer_env: dict[str, Node | None]) -> None:
        params: dict[str, Node] = {}
        args = fn.args
        positional = [*args.posonlyargs, *args.args]
        defaults = dict(zip((a.arg for a in positional[len(positional) - len(args.defaults):]), args.defaults))
        defaults.update((a.arg, d) for a, d in zip(args.kwonlyargs, args.kw_defaults) if d is not None)
        counted = used_as_integers(fn.body if isinstance(fn.body, list) else [ast.Expr(fn.body)])
        counted |= docstring_int_names(ast.get_docstring(fn) if not isinstance(fn, ast.Lambda) else None,
                                       [a.arg for a in [*positional, *args.kwonlyargs]])
        outer, self.line = self.line, fn.lineno  # parameters hold their values from the definition on
        for a in [*positional, *args.kwonlyargs]:
            is_int = int_annotation(a.annotation) or int_default(defaults.get(a.arg)) or a.arg in counted \
                or integer_array_annotation(a.annotation)  # `npt.NDArray[np.int64]`: exact integers
            params[a.arg] = self.input(a.arg, is_int, fmt=format_of_annotation(a.annotation, self.names))
        for a in (args.vararg, args.kwarg):
            if a is not None:
                params[a.arg] = self.input(a.arg)
        self.line = outer
        if isinstance(fn, ast.Lambda):
            body: list[ast.stmt] = [ast.Return(fn.body, lineno=fn.body.lineno, col_offset=fn.body.col_offset,
                                               end_lineno=fn.body.end_lineno, end_col_offset=fn.body.end_col_offset)]
            clauses = self._scope_clauses([], [fn.lineno])
        else:
            body = fn.body
            head = range(fn.lineno, (fn.body[0].lineno if fn.body else fn.lineno) + 1)
            clauses = self._scope_clauses(fn.body, head)
        # Names the function rebinds are its own; the rest of the enclosing scope stays visible.
        own = bound_names(body, self.walrus)
        env = {k: v for k, v in outer_env.items() if k not in own}
        self._scope(qual, body, params, clauses, env, parameter_constraints(fn))

    def _class(self, stmt: ast.ClassDef, scope: str, env: dict[str, Node | None]) -> None:
        for sub in stmt.body:
            if isinstance(sub, FUNCS):
                self.function(sub, f"{stmt.name}.{sub.name}", {} if scope == MODULE else dict(env))

    # ---- statements -------------------------------------------------------------------------------------
    def block(self, scope: str, body: list[ast.stmt], env: dict[str, Node | None], ctx: Context) -> None:
        for stmt in body:
            try:
                self._statement(scope, stmt, env, ctx)
            except RecursionError:
                self.problems.append((self.source.span(stmt), "the statement is nested too deeply to analyse"))
                for target in bound_names([stmt], self.walrus):
                    env[target] = self.input(target)

    def _statement(self, scope: str, stmt: ast.stmt, env: dict[str, Node | None], ctx: Context) -> None:
        outer, self.line = self.line, stmt.lineno
        try:
            self._read_statement(scope, stmt, env, ctx)
        finally:
            self.line = outer

    def _read_statement(self, scope: str, stmt: ast.stmt, env: dict[str, Node | None], ctx: Context) -> None:
        conv = Converter(self, env, ctx, scope, stmt)
        if isinstance(stmt, FUNCS):
            for d in stmt.decorator_list:
                self.scan(conv, d)
            if scope != MODULE:  # a top-level definition is a unit of its own
                self.function(stmt, f"{scope}.{stmt.name}", env)
            env[stmt.name] = None
            return
        if isinstance(stmt, ast.ClassDef):
            if scope != MODULE:
                self._class(stmt, scope, env)
            return
        if isinstance(stmt, (ast.Assign, ast.AnnAssign, ast.AugAssign)):
            self._assign(stmt, env, ctx, conv)
            return
        if isinstance(stmt, ast.If):
            self._if(scope, stmt, env, ctx, conv)
            return
        if isinstance(stmt, ast.Assert):
            self.scan(conv, stmt.test)
            assume(conv, stmt.test, True, ctx, "assert", stmt.lineno)
            return
        if isinstance(stmt, (ast.For, ast.AsyncFor, ast.While)):
            rec = read_recurrence(self, scope, stmt, env, ctx) if isinstance(stmt, ast.For) else None
            if rec is not None:
                self.recurrences.append(rec)  # measured over its trip count (`numeric/loops.py`)
            walk_loop(self, scope, stmt, env, ctx, conv)
            return
        if isinstance(stmt, (ast.With, ast.AsyncWith)):
            for item in stmt.items:
                self.scan(conv, item.context_expr)
                for t in target_names(item.optional_vars):
                    env[t] = self.input(t)
            self.block(scope, stmt.body, env, ctx)
            return
        if isinstance(stmt, ast.Try) or type(stmt).__name__ == "TryStar":
            for part in (stmt.body, *(h.body for h in stmt.handlers), stmt.orelse, stmt.finalbody):  # type: ignore[attr-defined]
                self.block(scope, part, env, ctx.copy())
            self._opaque_bindings(stmt, env)
            return
        if isinstance(stmt, (ast.Global, ast.Nonlocal)):
            for n in stmt.names:
                env[n] = self.input(n)
            return
        if isinstance(stmt, ast.Match):
            self.scan(conv, stmt.subject)
            for case in stmt.cases:
                self.block(scope, case.body, dict(env), ctx.copy())
            self._opaque_bindings(stmt, env)
            return
        for child in ast.iter_child_nodes(stmt):
            if isinstance(child, ast.expr):
                self.scan(conv, child)

    def _opaque_bindings(self, stmt: ast.stmt, env: dict[str, Node | None]) -> None:
        for t in bound_names([stmt], self.walrus):
            env[t] = self.input(t, like=env.get(t))

    def _assign(self, stmt: ast.Assign | ast.AnnAssign | ast.AugAssign, env: dict[str, Node | None],
                ctx: Context, conv: Converter) -> None:
        if isinstance(stmt, ast.AugAssign):
            self._augmented(stmt, env, ctx, conv)
            return
        value = stmt.value
        targets = stmt.targets if isinstance(stmt, ast.Assign) else [stmt.target]
        if value is None:
            return
        if (len(targets) == 1 and isinstance(targets[0], (ast.Tuple, ast.List)) and isinstance(value, (ast.Tuple, ast.List))
                and len(targets[0].elts) == len(value.elts)
                and not any(isinstance(e, ast.Starred) for e in (*targets[0].elts, *value.elts))):
            # `a, b = x + 1, y * 2`: each name is bound to its own value (all evaluated before binding).
            nodes = [self.scan(conv, v) for v in value.elts]
            for t, n in zip(targets[0].elts, nodes):
                if isinstance(t, ast.Name):
                    self._bind(t.id, n, stmt, env, ctx)
                else:
                    for name in target_names(t):
                        env[name] = self.input(name)
            return
        if self.names.not_binary64(value):
            for target in targets:
                for t in target_names(target):
                    env[t] = None  # sympy or mpmath objects, not binary64 numbers
            return
        node = self.scan(conv, value)
        if isinstance(stmt, ast.AnnAssign) and int_annotation(stmt.annotation):
            ctx.int_names.add(target_names(stmt.target)[0] if target_names(stmt.target) else "")
        for target in targets:
            if isinstance(target, ast.Name):
                if node is not None and node.kind == INPUT and not node.is_int and not isinstance(value, ast.Name):
                    # An opaque value (unknown call, subscript): name the input after the variable.
                    stated = format_of_annotation(stmt.annotation, self.names) if isinstance(stmt, ast.AnnAssign) \
                        else None
                    old, node = node, self.input(target.id, node.is_int, like=node, fmt=stated)
                    ctx.constraints.extend(Constraint(target.id, c.interval, None, c.source, c.line)
                                           for c in list(ctx.constraints) if c.name == old.name and c.interval)
                self._bind(target.id, node, stmt, env, ctx)
            else:
                shape = isinstance(value, ast.Attribute) and value.attr == "shape"  # `n, m = a.shape`
                for t in target_names(target):
                    env[t] = self.input(t, shape)
                    if shape:
                        ctx.int_names.add(t)

    def _augmented(self, stmt: ast.AugAssign, env: dict[str, Node | None], ctx: Context, conv: Converter) -> None:
        if isinstance(stmt.target, ast.Name) and type(stmt.op) in BINOPS:
            current = env.get(stmt.target.id)
            if stmt.target.id not in env:
                current = conv.convert(stmt.target)
            value = conv.convert(stmt.value)
            if current is not None and value is not None:
                op = BINOPS[type(stmt.op)]
                is_int = current.is_int and value.is_int and op in ("add", "sub", "mul")
                span = self.source.span(stmt)
                node = Node(op, (current, value), span=span, is_int=is_int, text=self.source.segment(span))
                self._add_site(node, conv)
                self._bind(stmt.target.id, node, stmt, env, ctx)
                return
        self.scan(conv, stmt.value)
        for t in target_names(stmt.target):
            env[t] = self.input(t, like=env.get(t))

    def _bind(self, name: str, node: Node | None, stmt: ast.stmt, env: dict[str, Node | None], ctx: Context) -> None:
        if node is not None and node.kind not in (INPUT, CONST):
            if len(topological(node)) > self.max_nodes:
                node = self.input(name, like=node)  # keep sites bounded: a long chain is cut here
            else:
                self._bindings[id(node)] = Binding(name, stmt.lineno, self.source.span(stmt))
        env[name] = node
        if node is not None and node.is_int:
            ctx.int_names.add(name)
        else:
            ctx.int_names.discard(name)

    def _if(self, scope: str, stmt: ast.If, env: dict[str, Node | None], ctx: Context, conv: Converter) -> None:
        self.scan(conv, stmt.test)
        body_exits = exits(stmt.body)
        body_ctx, else_ctx = ctx.copy(), ctx.copy()
        assume(conv, stmt.test, True, body_ctx, "branch", stmt.lineno)
        assume(conv, stmt.test, False, else_ctx, "branch", stmt.lineno)
        body_env, else_env = dict(env), dict(env)
        self.block(scope, stmt.body, body_env, body_ctx)
        self.block(scope, stmt.orelse, else_env, else_ctx)
        if body_exits and not stmt.orelse:
            # A guard: after `if bad: raise/return`, the opposite holds.
            assume(conv, stmt.test, False, ctx, "guard", stmt.lineno)
            env.update(else_env)
            return
        if body_exits and not exits(stmt.orelse):
            env.update(else_env)
            ctx.constraints = else_ctx.constraints
            return
        if exits(stmt.orelse) and not body_exits:
            env.update(body_env)
            ctx.constraints = body_ctx.constraints
            return
        for name in bound_names(stmt.body, self.walrus) | bound_names(stmt.orelse, self.walrus):
            a, b = body_env.get(name), else_env.get(name)
            env[name] = a if a is b else self.input(name, like=_wider(a, b))

    # ---- sites ------------------------------------------------------------------------------------------
    def scan(self, conv: Converter, expr: ast.expr) -> Node | None:
        """Convert an expression, making sites of its maximal numeric parts; returns its node. Values only
        formatted into a string (f-strings) are not analysed: their digits are for display; nor are the operands
        of a comparison (`if abs(x - prev) < tol`, `while r != 0`), which decide a branch rather than give a
        result (a condition's ranges still narrow what follows: `ranges.assume`)."""
        if isinstance(expr, ast.JoinedStr):
            return None
        if isinstance(expr, ast.Compare):  # a test: its operands decide a branch, their digits are no result's
            conv.scanned.add(id(expr))
            return conv.convert(expr)
        node = conv.convert(expr)
        if node is not None and node.kind not in (INPUT, CONST):
            self._add_site(node, conv)
        elif node is None:
            for child in ast.iter_child_nodes(expr):
                if isinstance(child, ast.expr) and id(child) not in conv.scanned:
                    self.scan(conv, child)
                elif isinstance(child, ast.keyword):
                    self.scan(conv, child.value)
                elif isinstance(child, ast.comprehension) and id(child.iter) not in conv.scanned:
                    self.scan(conv, child.iter)
        conv.scanned.add(id(expr))
        return node

    def _add_site(self, root: Node, conv: Converter) -> None:
        if root.is_int or root.span is None or conv.stmt is None:
            return
        nodes = topological(root)
        if not any(OPERATIONS.get(n.kind) is not None and OPERATIONS[n.kind].rounds or n.kind in REDUCTIONS
                   for n in nodes):
            return
        ranges, filters = site_ranges(nodes, conv.ctx)
        bindings = {id(n): self._bindings[id(n)] for n in nodes if id(n) in self._bindings}
        held_after = {id(n): self._held_after[id(n)] for n in nodes if id(n) in self._held_after}
        inlined = {id(n): self.inlined[id(n)] for n in nodes if id(n) in self.inlined} if self.inlined else {}
        self.sites.append(Site(root=root, scope=conv.scope, span=root.span, statement_line=conv.stmt.lineno,
                               ranges=ranges, filters=filters, float_format=root.format,
                               bindings=tuple(sorted(set(bindings.values()), key=lambda b: b.line)),
                               bindings_by_node=bindings, inlined=inlined, arrays=array_inputs(nodes, conv.ctx),
                               held_after=held_after))


def _wider(a: Node | None, b: Node | None) -> Node | None:
    """Of two values a name may hold after a branch, the one whose format its input should take."""
    if a is None or b is None:
        return a or b
    return a if promote(a.format, a.weak, b.format, b.weak)[0] is a.format else b


def _union(intervals: list[tuple[int, int]]) -> list[tuple[int, int]]:
    """Sorted, overlapping line intervals merged into disjoint ones."""
    out: list[tuple[int, int]] = []
    for a, b in intervals:
        if out and a <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], b))
        else:
            out.append((a, b))
    return out


def module_constants(index: "ModuleIndex") -> dict[str, Node]:
    """Names bound exactly once at module level to an expression without inputs (never `global` elsewhere).
    Names bound only to sympy or mpmath objects are recorded as symbolic: not binary64 in any function."""
    tree, names = index.tree, index.names
    counts: dict[str, int] = {}
    values: dict[str, ast.expr | None] = {}
    symbolic: set[str] = set()
    for stmt in tree.body:
        if isinstance(stmt, ast.Assign) and names.not_binary64(stmt.value):
            symbolic.update(n for t in stmt.targets for n in target_names(t))
            continue
        for target, value in assignments(stmt):
            counts[target] = counts.get(target, 0) + 1
            values[target] = value
    names.symbolic.update(symbolic - set(counts))
    for n in index.globals:  # rebound through `global` (or `nonlocal`) somewhere: not a constant
        counts[n] = 2
    walker = Walker(index)
    consts: dict[str, Node] = {}
    for name, value in values.items():
        if counts.get(name) != 1 or value is None:
            continue
        conv = Converter(walker, dict(consts), Context({}, []), MODULE, None)
        try:
            node = conv.convert(value)
        except RecursionError:
            continue
        if node is not None and node.kind != INPUT and not any(n.kind == INPUT for n in topological(node)):
            consts[name] = node
    return consts
