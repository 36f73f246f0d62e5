"""Applying fixes to source text: the replacements (non-overlapping, first listed wins), then the imports they
need (added to an existing `from M import …` line, or as a new line among the imports), in the text's own
line endings. Used by `condhint fix` and by the language server's fix-all."""
from __future__ import annotations

import ast
import io
import re
import sys
import tokenize
from typing import Iterable

from condhint.findings import Fix
from condhint.reading.source import Source
from condhint.sourcefile import dominant_newline

_NEWLINE = re.compile(r"\r\n|\r|\n")
_FROM = re.compile(r"^from\s+([\w.]+)\s+import\s+([\w]+)$")
_IMPORT = re.compile(r"^import\s+([\w.]+)(?:\s+as\s+(\w+))?$")


def line_starts(text: str) -> list[int]:
    starts = [0]
    starts += [m.end() for m in _NEWLINE.finditer(text)]
    return starts


def offset(text: str, starts: list[int], line: int, col: int) -> int:
    """Character offset of (1-based line, 0-based code-point column)."""
    return starts[line - 1] + col if line - 1 < len(starts) else len(text)


def select_fixes(fixes: Iterable[Fix]) -> list[Fix]:
    """The fixes that can be applied together: identical ones once, overlapping ones dropped (first wins)."""
    chosen: list[Fix] = []
    for fix in fixes:
        s = fix.span
        a, b = (s.line, s.col), (s.end_line, s.end_col)
        clash = False
        for other in chosen:
            o = other.span
            oa, ob = (o.line, o.col), (o.end_line, o.end_col)
            if (oa, ob) == (a, b) and other.replacement == fix.replacement:
                clash = True
                break
            if a < ob and oa < b:
                clash = True
                break
        if not clash:
            chosen.append(fix)
    return chosen


def apply_fixes(text: str, fixes: Iterable[Fix]) -> str:
    """`text` with the fixes applied. Raises ValueError if the result would not parse."""
    chosen = select_fixes(fixes)
    if not chosen:
        return text
    newline = dominant_newline(text)
    starts = line_starts(text)
    edits = sorted([(offset(text, starts, f.span.line, f.span.col), offset(text, starts, f.span.end_line, f.span.end_col),
                     _NEWLINE.sub(newline, f.replacement)) for f in chosen] + _note_edits(text, starts, chosen), reverse=True)
    out = text
    for start, end, repl in edits:
        out = out[:start] + repl + out[end:]
    needed: list[str] = []
    for f in chosen:
        for imp in f.imports:
            if imp not in needed:
                needed.append(imp)
    try:
        for imp in needed:
            out = add_import(out, imp)  # parses `out`: a text that does not parse is refused here too
        ast.parse(out)
    except SyntaxError as exc:
        raise ValueError(f"the fixes do not give valid Python: {exc.msg} at line {exc.lineno}") from None
    return drop_unused_imports(text, out)


def _note_edits(text: str, starts: list[int], fixes: list[Fix]) -> list[tuple[int, int, str]]:
    """Each fix's note as a comment at the end of its last line, where that line has no comment yet."""
    notes = {f.span.end_line: f.note for f in fixes if f.note}
    if not notes:
        return []
    comments = {tok.start[0] for tok in _tokens(text) if tok.type == tokenize.COMMENT}
    out = []
    for line, note in notes.items():
        if line in comments or line > len(starts):
            continue
        end = starts[line] if line < len(starts) else len(text)
        at = starts[line - 1] + len(text[starts[line - 1]:end].rstrip())
        out.append((at, at, f"  # {note}"))
    return out


def _tokens(text: str) -> list[tokenize.TokenInfo]:
    try:
        return list(tokenize.generate_tokens(io.StringIO(text).readline))
    except (tokenize.TokenError, SyntaxError):
        return []


def _loads(tree: ast.AST) -> set[str]:
    return {n.id for n in ast.walk(tree) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Load)}


def _exported(tree: ast.Module) -> set[str]:
    """The names a module lists in `__all__` (re-exports stay imported)."""
    out: set[str] = set()
    for stmt in tree.body:
        if isinstance(stmt, (ast.Assign, ast.AugAssign, ast.AnnAssign)) and "__all__" in {
                t.id for t in (stmt.targets if isinstance(stmt, ast.Assign) else [stmt.target])
                if isinstance(t, ast.Name)} and stmt.value is not None:
            out |= {c.value for c in ast.walk(stmt.value) if isinstance(c, ast.Constant) and isinstance(c.value, str)}
    return out


def drop_unused_imports(before: str, after: str) -> str:
    """`after` without the module-level imported names that `before` used and `after` no longer does (the ones
    a fix made unused); imports that were unused already, and names re-exported by `__all__`, stay. Only
    one-line import statements are rewritten; an emptied one is removed with its line."""
    old, new = ast.parse(before), ast.parse(after)
    gone = _loads(old) - _loads(new) - _exported(new)
    if not gone:
        return after
    starts, lines, source = line_starts(after), after.splitlines(keepends=True), Source(after)
    out = after
    for stmt in reversed(new.body):
        if not isinstance(stmt, (ast.Import, ast.ImportFrom)) or stmt.lineno != stmt.end_lineno or any(
                a.name == "*" for a in stmt.names):
            continue
        keep = [a for a in stmt.names if (a.asname or a.name).split(".")[0] not in gone]
        if len(keep) == len(stmt.names):
            continue
        a = offset(after, starts, stmt.lineno, source.char_col(stmt.lineno, stmt.col_offset))
        b = offset(after, starts, stmt.lineno, source.char_col(stmt.lineno, stmt.end_col_offset or 0))
        line = lines[stmt.lineno - 1]
        if not keep:
            rest = line[line.find(after[a:b]) + (b - a):].strip()
            if after[starts[stmt.lineno - 1]:a].strip() or (rest and not rest.startswith("#")):
                continue  # shares its line with other statements
            out = out[:starts[stmt.lineno - 1]] + out[starts[stmt.lineno - 1] + len(line):]
            continue
        names = ", ".join(x.name + (f" as {x.asname}" if x.asname else "") for x in keep)
        head = f"from {'.' * stmt.level}{stmt.module or ''} import " if isinstance(stmt, ast.ImportFrom) else "import "
        out = out[:a] + head + names + out[b:]
    return out


def add_import(text: str, statement: str) -> str:
    """`text` with `statement` (`import M` or `from M import name`) in force at module level."""
    tree = ast.parse(text)
    body = tree.body
    m_from, m_imp = _FROM.match(statement), _IMPORT.match(statement)
    if m_from is None and m_imp is None:
        raise ValueError(f"unsupported import statement {statement!r}")
    source = Source(text)
    if m_from is not None:
        module, name = m_from.groups()
        for stmt in body:
            if isinstance(stmt, ast.ImportFrom) and stmt.module == module and stmt.level == 0:
                if any(a.name == name and a.asname in (None, name) for a in stmt.names):
                    return text
        for stmt in body:
            if isinstance(stmt, ast.ImportFrom) and stmt.module == module and stmt.level == 0 and \
                    all(a.name != "*" for a in stmt.names):
                last = stmt.names[-1]
                line, col = last.end_lineno or last.lineno, source.char_col(last.end_lineno or last.lineno,
                                                                            last.end_col_offset or 0)
                at = offset(text, line_starts(text), line, col)
                return text[:at] + f", {name}" + text[at:]
    else:
        module, alias = m_imp.groups()
        for stmt in body:
            if isinstance(stmt, ast.Import) and any(a.name == module and (a.asname or a.name) == (alias or module)
                                                    for a in stmt.names):
                return text
    return _insert_line(text, tree, statement, module)


def _insert_line(text: str, tree: ast.Module, statement: str, module: str) -> str:
    """A new import line: after the last standard-library import for a standard module (before the first
    import otherwise), or after the docstring and `__future__` imports when there are none."""
    newline = dominant_newline(text)
    starts = line_starts(text)
    body = tree.body
    imports = [s for s in body if isinstance(s, (ast.Import, ast.ImportFrom))]
    stdlib = module.split(".")[0] in getattr(sys, "stdlib_module_names", {"math"})

    def top(s: ast.stmt) -> str:
        return (s.names[0].name if isinstance(s, ast.Import) else (s.module or "")).split(".")[0]

    future = [s for s in imports if isinstance(s, ast.ImportFrom) and s.module == "__future__"]
    std = [s for s in imports if s not in future and top(s) in getattr(sys, "stdlib_module_names", ())]
    others = [s for s in imports if s not in future and s not in std]
    after: ast.stmt | None = None
    before: ast.stmt | None = None
    if stdlib and std:
        after = std[-1]
    elif stdlib and others:
        before = others[0]
    elif not stdlib and (others or std):
        after = (others or std)[-1]
    if after is None and before is None:
        lead = [s for s in body[:1] if isinstance(s, ast.Expr) and isinstance(getattr(s, "value", None), ast.Constant)
                and isinstance(s.value.value, str)]
        after = (future or lead or [None])[-1]
    if before is not None:
        at = starts[before.lineno - 1]
        return text[:at] + statement + newline + text[at:]
    if after is None:  # before the first statement: a shebang, coding cookie or comments stay on top
        if not body:
            return text + ("" if not text or text.endswith(("\n", "\r")) else newline) + statement + newline
        at = starts[body[0].lineno - 1]
        return text[:at] + statement + newline + text[at:]
    end_line = after.end_lineno or after.lineno
    if end_line < len(starts):
        at = starts[end_line]
        return text[:at] + statement + newline + text[at:]
    return text + ("" if text.endswith(("\n", "\r")) else newline) + statement + newline
