"""Source text of a reported file (or of one notebook cell), read lazily by writers that need it."""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from condhint.sourcefile import UnreadableFile, read_source


@lru_cache(maxsize=256)
def _file_text(path: str) -> str | None:
    try:
        return read_source(Path(path)).text
    except (UnreadableFile, OSError):
        return None


def text_of(path: str, cell: int | None = None) -> str | None:
    """The text a finding's lines refer to: the file, or the notebook cell (1-based) it sits in."""
    if cell is None:
        return _file_text(path)
    from condhint.review.notebooks import cell_texts

    try:
        cells = cell_texts(Path(path))
    except (OSError, ValueError):
        return None
    return cells.get(cell)


def import_line(text: str | None) -> int:
    """The 1-based line before which new imports go: after the docstring, `__future__` and leading imports.

    Only top-level statements at the start of the text count, so an import is never put inside a block.
    """
    if not text:
        return 1
    import ast

    try:
        tree = ast.parse(text)
    except (SyntaxError, ValueError):
        return 1
    lines = text.splitlines()
    line = 1
    while line <= min(2, len(lines)) and lines[line - 1].startswith("#"):  # `#!` and coding lines stay first
        line += 1
    for i, stmt in enumerate(tree.body):
        is_doc = i == 0 and isinstance(stmt, ast.Expr) and isinstance(stmt.value, ast.Constant) \
            and isinstance(stmt.value.value, str)
        if is_doc or isinstance(stmt, (ast.Import, ast.ImportFrom)):
            line = (stmt.end_lineno or stmt.lineno) + 1
            continue
        break
    return line
