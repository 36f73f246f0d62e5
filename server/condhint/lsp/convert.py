"""Small converters from the core's plain data to lsprotocol types (`to_lsp_*`), and positions.

The core counts columns in code points; the client counts in its negotiated position encoding (UTF-16 code
units unless it offered UTF-8). `Positions` converts both ways for one document's lines.
"""
from __future__ import annotations

import hashlib
import math
from typing import Sequence

from lsprotocol import types
from pygls.workspace.position_codec import PositionCodec

from condhint.expr import Span
from condhint.findings import Finding
from condhint.lsp.textedits import Replacement
from condhint.messages import digits, num
from condhint.numeric.formats import format_named

SOURCE = "condhint"
SEVERITY = {
    "error": types.DiagnosticSeverity.Error,
    "warning": types.DiagnosticSeverity.Warning,
    "info": types.DiagnosticSeverity.Information,
}


class Positions:
    """Code-point columns <-> client columns, for the lines of one document (1-based lines inside)."""

    def __init__(self, lines: Sequence[str], codec: PositionCodec) -> None:
        self.lines = lines
        self.codec = codec

    def _line(self, line: int) -> str:
        return self.lines[line - 1] if 0 < line <= len(self.lines) else ""

    def to_client(self, line: int, col: int) -> types.Position:
        text = self._line(line)
        col = max(0, min(col, len(text)))
        return types.Position(line=max(line - 1, 0), character=self.codec.client_num_units(text[:col]))

    def from_client(self, pos: types.Position) -> tuple[int, int]:
        """(1-based line, code-point column) of a client position; past the end of a line means its end."""
        text = self._line(pos.line + 1)
        units = 0
        for i, ch in enumerate(text):
            if units >= pos.character:
                return pos.line + 1, i
            units += self.codec.client_num_units(ch)
        return pos.line + 1, len(text)

    def range(self, span: Span) -> types.Range:
        return types.Range(start=self.to_client(span.line, span.col), end=self.to_client(span.end_line, span.end_col))

    def line_range(self, line: int) -> types.Range:
        return types.Range(start=self.to_client(line, 0), end=self.to_client(line, len(self._line(line))))


def figures(f: Finding) -> str:
    """The standard tail of a diagnostic's message: κ, digits lost (measured, predicted), category."""
    parts = []
    if f.kappa is not None and not math.isnan(f.kappa):
        parts.append(f"κ ≈ {num(f.kappa)}")
    if f.measured_digits_lost is not None or f.predicted_digits_lost is not None:
        parts.append(f"digits lost {digits(f.measured_digits_lost)} measured, "
                     f"{digits(f.predicted_digits_lost)} predicted")
    if f.category:
        parts.append(f"category {f.category}")
    return f" [{'; '.join(parts)}]" if parts else ""


def to_lsp_diagnostic(f: Finding, pos: Positions, uri: str, related: bool) -> types.Diagnostic:
    info = None
    if related and f.related:
        info = [types.DiagnosticRelatedInformation(
            location=types.Location(uri=uri, range=pos.line_range(line)), message=note) for line, note in f.related]
    return types.Diagnostic(
        range=pos.range(f.span), severity=SEVERITY[f.severity], code=f.code, source=SOURCE,
        message=f"{f.message}{figures(f)}", related_information=info,
        data={"fingerprint": f.fingerprint(), "code": f.code})


def result_id(items: list[types.Diagnostic]) -> str:
    """A result id for pull diagnostics: equal diagnostics give equal ids."""
    return hashlib.sha1(repr(items).encode("utf-8", "surrogatepass")).hexdigest()[:20]


def to_lsp_text_edit(r: Replacement, pos: Positions, snippets: bool = False) -> types.TextEdit | types.SnippetTextEdit:
    """An edit for the client: with tab stops where the replacement has them and the client takes snippet edits
    (LSP 3.18 `workspace.workspaceEdit.snippetEditSupport`, inside `documentChanges`), plain text otherwise."""
    span = types.Range(start=pos.to_client(r.line, r.col), end=pos.to_client(r.end_line, r.end_col))
    if snippets and r.snippet is not None:
        return types.SnippetTextEdit(range=span, snippet=types.StringValue(value=r.snippet))
    return types.TextEdit(range=span, new_text=r.text)


def to_lsp_workspace_edit(uri: str, version: int | None, edits: list[types.TextEdit | types.SnippetTextEdit],
                          document_changes: bool
                          ) -> types.WorkspaceEdit:
    if document_changes:
        doc = types.OptionalVersionedTextDocumentIdentifier(uri=uri, version=version)
        return types.WorkspaceEdit(document_changes=[types.TextDocumentEdit(text_document=doc, edits=edits)])
    return types.WorkspaceEdit(changes={uri: edits})


def to_lsp_hover(text: str, span: Span | None, pos: Positions, markdown: bool) -> types.Hover:
    kind = types.MarkupKind.Markdown if markdown else types.MarkupKind.PlainText
    return types.Hover(contents=types.MarkupContent(kind=kind, value=text),
                       range=pos.range(span) if span is not None else None)


def inlay_label(f: Finding) -> str:
    """A compact tag after a flagged expression: digits lost, or κ where the loss is inherent."""
    fmt = "" if f.format == "binary64" else f" ({format_named(f.format).short})"
    if f.category == "inherent" and f.kappa is not None:
        return f"κ≈{num(f.kappa, 1)}{fmt}"
    return f"−{digits(f.digits_lost)} digits{fmt}"


def to_lsp_inlay_hint(f: Finding, pos: Positions) -> types.InlayHint:
    return types.InlayHint(position=pos.to_client(f.span.end_line, f.span.end_col), label=inlay_label(f),
                           padding_left=True, tooltip=f"{f.code} {f.name}: {f.message}")
