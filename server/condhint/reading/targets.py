"""What statements bind: assignment targets, the names a block may bind, and whether a block always exits."""
from __future__ import annotations

import ast
from typing import Iterator

FUNCS = (ast.FunctionDef, ast.AsyncFunctionDef)
DEFS = (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)


def target_names(target: ast.expr | None) -> list[str]:
    if target is None:
        return []
    if isinstance(target, ast.Name):
        return [target.id]
    if isinstance(target, (ast.Tuple, ast.List)):
        return [n for t in target.elts for n in target_names(t)]
    if isinstance(target, ast.Starred):
        return target_names(target.value)
    return []


def bound_names(body: list[ast.stmt], walrus: bool = True) -> set[str]:
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
                out.update(target_names(t))
        elif isinstance(node, (ast.AnnAssign, ast.AugAssign)):
            out.update(target_names(node.target))
        elif isinstance(node, (ast.For, ast.AsyncFor)):
            out.update(target_names(node.target))
        elif isinstance(node, ast.NamedExpr):
            out.add(node.target.id)
        elif isinstance(node, (ast.With, ast.AsyncWith)):
            for item in node.items:
                out.update(target_names(item.optional_vars))
        elif isinstance(node, ast.ExceptHandler) and node.name:
            out.add(node.name)
        elif isinstance(node, DEFS):
            out.add(node.name)
            continue
        elif isinstance(node, (ast.Import, ast.ImportFrom)):
            for a in node.names:
                out.add((a.asname or a.name).split(".")[0])
        elif isinstance(node, ast.Lambda):
            continue
        stack.extend(ast.iter_child_nodes(node))
    return out


def assignments(stmt: ast.stmt) -> Iterator[tuple[str, ast.expr | None]]:
    """(name, value) per binding of a module-level statement; value None (twice) when it is not one plain value."""
    if isinstance(stmt, ast.Assign):
        for t in stmt.targets:
            if isinstance(t, ast.Name):
                yield t.id, stmt.value
            else:
                for n in target_names(t):
                    yield n, None
                    yield n, None
    elif isinstance(stmt, ast.AnnAssign) and isinstance(stmt.target, ast.Name):
        yield stmt.target.id, stmt.value
    elif isinstance(stmt, ast.AugAssign):
        for n in target_names(stmt.target):
            yield n, None
            yield n, None
    elif isinstance(stmt, (ast.If, ast.For, ast.While, ast.With, ast.Try)):
        for n in bound_names([stmt]):
            yield n, None
            yield n, None


def exits(body: list[ast.stmt]) -> bool:
    return bool(body) and isinstance(body[-1], (ast.Return, ast.Raise, ast.Continue, ast.Break))


def first_line(stmt: ast.stmt) -> int:
    """The first line of a statement, decorators included."""
    return min([stmt.lineno, *(d.lineno for d in getattr(stmt, "decorator_list", []))])
