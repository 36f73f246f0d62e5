"""Text edits the server offers, computed on plain text (no protocol types here).

Positions are 1-based lines and 0-based columns in code points, like `expr.Span`; the adapter converts
them to the client's position encoding. Comments follow design §4: `# condhint: CLAUSE, …` on a line.
"""
from __future__ import annotations

import difflib
import io
import re
import tokenize
from dataclasses import dataclass

_MARK = re.compile(r"#\s*condhint\s*:", re.I)
_LINE = re.compile(r"[^\r\n]*(?:\r\n|\r|\n)|[^\r\n]+$")


@dataclass(frozen=True)
class Replacement:
    line: int
    col: int
    end_line: int
    end_col: int
    text: str
    snippet: str | None = None  # the same text with tab stops (`${1:low}`) for clients that take snippet edits


@dataclass
class LineFacts:
    """Where comments are, and which line ends fall inside a multi-line string (tokenize's view)."""

    comments: dict[int, tuple[int, str]]  # line -> (column, comment text)
    in_string: set[int]  # lines whose end is inside a string token

    @classmethod
    def of(cls, text: str) -> "LineFacts":
        comments: dict[int, tuple[int, str]] = {}
        in_string: set[int] = set()
        try:
            for tok in tokenize.generate_tokens(io.StringIO(text).readline):
                if tok.type == tokenize.COMMENT:
                    comments[tok.start[0]] = (tok.start[1], tok.string)
                elif tok.type == tokenize.STRING and tok.end[0] > tok.start[0]:
                    in_string.update(range(tok.start[0], tok.end[0]))
        except (tokenize.TokenError, SyntaxError, IndentationError):
            pass  # half-typed code: the facts gathered so far
        return cls(comments, in_string)


def add_clause(lines: list[str], facts: LineFacts, line: int, clause: str, snippet: str | None = None
               ) -> Replacement | None:
    """Add a condhint clause on a line: extend its condhint comment or start one. None where the line
    already has another comment or ends inside a string (a second comment would not be read). `snippet` is the
    clause with tab stops, for clients that take snippet edits."""
    if not 0 < line <= len(lines) or line in facts.in_string:
        return None
    text = lines[line - 1]
    found = facts.comments.get(line)
    if found is not None:
        col, comment = found
        if not _MARK.match(comment):
            return None
        end = col + len(comment)
        sep = "" if comment.rstrip().endswith(":") else ","
        return Replacement(line, end, line, end, f"{sep} {clause}", snippet and f"{sep} {snippet}")
    stripped = len(text.rstrip())
    return Replacement(line, stripped, line, len(text), f"  # condhint: {clause}", snippet and f"  # condhint: {snippet}")


def comment_line_before(lines: list[str], line: int, clause: str, snippet: str | None = None) -> Replacement:
    """A new comment line `# condhint: CLAUSE` inserted above `line`, with its indentation."""
    text = lines[line - 1] if 0 < line <= len(lines) else ""
    indent = text[: len(text) - len(text.lstrip())]
    return Replacement(line, 0, line, 0, f"{indent}# condhint: {clause}\n",
                       snippet and f"{indent}# condhint: {snippet}\n")


def apply(text: str, edits: list[Replacement]) -> str:
    """The text with non-overlapping replacements applied (for tests and for combining edits)."""
    starts = _line_starts(text)

    def offset(line: int, col: int) -> int:
        return min(starts[line - 1] + col, len(text)) if line <= len(starts) else len(text)

    out = text
    for e in sorted(edits, key=lambda e: (e.line, e.col), reverse=True):
        a, b = offset(e.line, e.col), offset(e.end_line, e.end_col)
        out = out[:a] + e.text + out[b:]
    return out


def _line_starts(text: str) -> list[int]:
    starts = [0]
    for m in re.finditer(r"\r\n|\r|\n", text):
        starts.append(m.end())
    return starts


def diff(old: str, new: str) -> list[Replacement]:
    """Line-granular replacements turning `old` into `new` (what changed, nothing more)."""
    a = _LINE.findall(old)
    b = _LINE.findall(new)
    out = []
    for tag, i1, i2, j1, j2 in difflib.SequenceMatcher(None, a, b, autojunk=False).get_opcodes():
        if tag == "equal":
            continue
        (l1, c1), (l2, c2) = _position(a, i1), _position(a, i2)
        out.append(Replacement(l1, c1, l2, c2, "".join(b[j1:j2])))
    return out


def _position(lines: list[str], index: int) -> tuple[int, int]:
    """The position where line `index` (0-based, of lines with their endings) starts; the end of the
    text when `index` is past the last line."""
    if index < len(lines):
        return index + 1, 0
    if not lines:
        return 1, 0
    last = lines[-1]
    if last.endswith(("\n", "\r")):
        return len(lines) + 1, 0
    return len(lines), len(last)
