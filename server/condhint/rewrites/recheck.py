"""The last check of a fix: the patched code, analysed again, has lost this finding and gained no other.

Only the part of the file the fix can affect is analysed again: the top-level function or class it is in,
with all module-level code around it (imports, constants), other top-level definitions blanked out so
line numbers stay put. A fix in module-level code re-analyses the whole file.
"""
from __future__ import annotations

import ast
from collections import Counter
from typing import TYPE_CHECKING, Callable

from condhint.findings import FileReport, Finding, Fix
from condhint.kinds import FIXABLE_CATEGORIES
from condhint.rewrites.apply import apply_fixes

if TYPE_CHECKING:
    from condhint.reading.module_index import ModuleIndex

FIXABLE = FIXABLE_CATEGORIES
RECHECKED = 3  # how many of the best candidates are re-analysed at most
_DEFS = (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)


def fixable_findings(findings: list[Finding]) -> Counter[tuple[str, str, str]]:
    return Counter((f.code, f.scope, " ".join(f.expression.split())) for f in findings if f.category in FIXABLE)


def _first_line(stmt: ast.stmt) -> int:
    return min([stmt.lineno, *(d.lineno for d in getattr(stmt, "decorator_list", []))])


def enclosing(tree: ast.Module, line: int) -> tuple[str, int] | None:
    """(name, how many top-level definitions of that name come before it) of the definition holding `line`."""
    seen: Counter[str] = Counter()
    for stmt in tree.body:
        if isinstance(stmt, _DEFS):
            if _first_line(stmt) <= line <= (stmt.end_lineno or stmt.lineno):
                return stmt.name, seen[stmt.name]
            seen[stmt.name] += 1
    return None


def focus(text: str, where: tuple[str, int] | None) -> str:
    """`text` with every top-level definition but `where` blanked (the whole text if that is not possible)."""
    if where is None:
        return text
    try:
        tree = ast.parse(text)
    except SyntaxError:
        return text
    lines = text.splitlines(keepends=True)
    keep: set[int] = set()
    drop: set[int] = set()
    seen: Counter[str] = Counter()
    for stmt in tree.body:
        span = set(range(_first_line(stmt), (stmt.end_lineno or stmt.lineno) + 1))
        if isinstance(stmt, _DEFS) and (stmt.name, seen[stmt.name]) != where:
            drop |= span
        else:
            keep |= span
        if isinstance(stmt, _DEFS):
            seen[stmt.name] += 1
    if keep & drop:
        return text  # statements sharing a line: keep everything
    out = []
    for i, line in enumerate(lines, start=1):
        if i in drop:
            body = line.rstrip("\r\n")
            out.append(line[len(body):])
        else:
            out.append(line)
    return "".join(out)


def rechecked(fixes: list[Fix], finding: Finding, index: "ModuleIndex",
              reanalyse: Callable[[str], FileReport]) -> list[Fix]:
    """The fixes (at most `RECHECKED`, in order) whose patched code re-analyses without `finding` and
    without any new fixable finding."""
    if not fixes:
        return []
    original = focus(index.text, enclosing(index.tree, finding.span.line))
    before = fixable_findings(reanalyse(original).findings)
    (own,) = fixable_findings([finding]) or [None]
    out: list[Fix] = []
    for fix in fixes[:RECHECKED]:
        try:
            patched = apply_fixes(original, [fix])
        except ValueError:
            continue
        again = reanalyse(patched)
        if again.status != "ok":
            continue
        after = fixable_findings(again.findings)
        if after - before or after[own] >= before[own]:
            continue
        out.append(fix)
    return out
