"""Source text with the position arithmetic `ast` needs: its columns are UTF-8 byte offsets."""
from __future__ import annotations

import ast
import re

from condhint.expr import Span


_NEWLINE = re.compile(r"\r\n|\r|\n")


def split_lines(text: str) -> list[str]:
    """The lines of a text as Python counts them (any of \\r\\n, \\r, \\n ends a line)."""
    return _NEWLINE.split(text)


class Source:
    def __init__(self, text: str) -> None:
        self.text = text
        self.lines = _NEWLINE.split(text)  # the line breaks Python itself counts
        self._bytes: dict[int, bytes] = {}

    def _line_bytes(self, line: int) -> bytes:
        b = self._bytes.get(line)
        if b is None:
            s = self.lines[line - 1] if 0 < line <= len(self.lines) else ""
            b = s.encode("utf-8", "surrogatepass")
            self._bytes[line] = b
        return b

    def char_col(self, line: int, byte_col: int) -> int:
        """Convert an `ast` byte column on a 1-based line to a column in code points."""
        if not 0 < line <= len(self.lines):
            return byte_col
        s = self.lines[line - 1]
        if s.isascii():
            return byte_col
        return len(self._line_bytes(line)[:byte_col].decode("utf-8", "replace"))

    def span(self, node: ast.AST) -> Span:
        line = node.lineno  # type: ignore[attr-defined]
        end_line = node.end_lineno or line  # type: ignore[attr-defined]
        return Span(
            line,
            self.char_col(line, node.col_offset),  # type: ignore[attr-defined]
            end_line,
            self.char_col(end_line, node.end_col_offset or 0),  # type: ignore[attr-defined]
        )

    def segment(self, span: Span) -> str:
        if span.line == span.end_line:
            return self.lines[span.line - 1][span.col : span.end_col] if span.line <= len(self.lines) else ""
        parts = [self.lines[span.line - 1][span.col :]]
        parts += self.lines[span.line : span.end_line - 1]
        parts.append(self.lines[span.end_line - 1][: span.end_col])
        return "\n".join(parts)
