"""Notebook documents (LSP 3.17 `notebookDocument/*`): the Python cells of a notebook analysed as one module.

The code cells are joined in order, so names defined in earlier cells are known in later ones; IPython magics
and shell escapes are neutralised and unparsable cells left out (with one CH001 on the cell) exactly as
`condhint check` does for `.ipynb` files (`review/notebooks.py`). The joined text is one `DocumentState` under
the notebook's URI, analysed like any document; diagnostics, hovers and code actions are moved to the cell they
fall in, lines counted within the cell. Joined lines and cell lines hold the same text (magic lines aside), so
columns need no conversion.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable

from attrs import evolve
from lsprotocol import types

from condhint.findings import Finding
from condhint.lsp import handlers
from condhint.lsp.analysing import Analyser
from condhint.lsp.convert import Positions, result_id, to_lsp_diagnostic
from condhint.lsp.state import DocumentState
from condhint.review.notebooks import cells_of, join_cells

if TYPE_CHECKING:
    from condhint.lsp.server import CondhintServer

NOTEBOOK_SYNC = types.NotebookDocumentSyncOptions(
    notebook_selector=[types.NotebookDocumentFilterWithCells(
        notebook="*", cells=[types.NotebookCellLanguage(language="python")])],
    save=True)


@dataclass
class Cell:
    uri: str
    first: int  # 0-based line of the joined text where the cell starts; -1 when it is left out
    count: int  # lines of the cell in the joined text
    lines: list[str]  # the cell's own text, for positions of findings reported on it directly

    def holds(self, joined_line: int) -> bool:
        return self.first >= 0 and self.first <= joined_line < self.first + self.count


@dataclass
class NotebookState(DocumentState):
    cells: list[Cell] = field(default_factory=list)
    unparsed: list[Finding] = field(default_factory=list)  # CH001 of cells left out; `cell` is 1-based

    def cell(self, uri: str) -> Cell | None:
        return next((c for c in self.cells if c.uri == uri), None)

    def cell_at(self, joined_line: int) -> Cell | None:
        return next((c for c in self.cells if c.holds(joined_line)), None)


def _layout(ls: "CondhintServer", uri: str) -> tuple[str, list[Cell], list[Finding]]:
    """The joined text of the notebook's Python code cells, where each cell sits in it, and CH001s."""
    notebook = ls.workspace.get_notebook_document(notebook_uri=uri)
    docs = [ls.workspace.get_text_document(c.document) for c in notebook.cells if c.kind == types.NotebookCellKind.Code] \
        if notebook is not None else []
    docs = [d for d in docs if d.language_id in (None, "python")]
    code = cells_of({"cells": [{"cell_type": "code", "source": d.source} for d in docs]})
    text, where, unparsed = join_cells(code, ls.path_of(uri))
    placed = {number: (first - 1, count) for first, count, number in where}
    cells = [Cell(d.uri, *placed.get(i, (-1, 0)), d.lines) for i, d in enumerate(docs, 1)]
    return text, cells, unparsed


def _refresh(ls: "CondhintServer", state: NotebookState) -> None:
    text, state.cells, state.unparsed = _layout(ls, state.uri)
    notebook = ls.workspace.get_notebook_document(notebook_uri=state.uri)
    state.update(text, notebook.version if notebook is not None else None)


# ---- synchronisation ---------------------------------------------------------------------------------------
def did_open(ls: "CondhintServer", params: types.DidOpenNotebookDocumentParams) -> None:
    nb = params.notebook_document
    state = ls.docs.add(NotebookState(nb.uri, ls.path_of(nb.uri), nb.version, ""))
    _refresh(ls, state)
    ls.analyser.schedule(state, 0.0)


def did_change(ls: "CondhintServer", params: types.DidChangeNotebookDocumentParams) -> None:
    state = ls.docs.get(params.notebook_document.uri)
    if not isinstance(state, NotebookState):
        return
    before = {c.uri for c in state.cells}
    _refresh(ls, state)
    gone = before - {c.uri for c in state.cells}
    for uri in gone:  # deleted cells (or cells no longer Python) keep no diagnostics
        ls.analyser.clear(uri)
    ls.analyser.schedule(state)


def did_save(ls: "CondhintServer", params: types.DidSaveNotebookDocumentParams) -> None:
    state = ls.docs.get(params.notebook_document.uri)
    if isinstance(state, NotebookState):
        ls.analyser.schedule(state)


def did_close(ls: "CondhintServer", params: types.DidCloseNotebookDocumentParams) -> None:
    state = ls.docs.close(params.notebook_document.uri)
    if isinstance(state, NotebookState):  # pushed even to pulling clients (see NotebookAnalyser)
        for cell in state.cells:
            ls.analyser.clear(cell.uri)


# ---- diagnostics per cell ----------------------------------------------------------------------------------
def _shift_range(r: types.Range, lines: int) -> types.Range:
    return types.Range(start=types.Position(r.start.line + lines, r.start.character),
                       end=types.Position(r.end.line + lines, r.end.character))


def cell_diagnostics(ls: "CondhintServer", state: NotebookState, cell: Cell) -> list[types.Diagnostic]:
    out = []
    for d in ls.analyser.diagnostics(state):
        if not cell.holds(d.range.start.line):
            continue
        related = [evolve(r, location=types.Location(uri=owner.uri, range=_shift_range(r.location.range, -owner.first)))
                   for r in d.related_information or []
                   if (owner := state.cell_at(r.location.range.start.line)) is not None] or None
        out.append(evolve(d, range=_shift_range(d.range, -cell.first), related_information=related))
    number = state.cells.index(cell) + 1
    pos = Positions(cell.lines, ls.codec)
    out += [to_lsp_diagnostic(f, pos, cell.uri, False) for f in state.unparsed if f.cell == number]
    return out


class NotebookAnalyser(Analyser):
    """Publishes a notebook's diagnostics on its cells (every cell, so fixed ones are cleared)."""

    def enrich(self, state: DocumentState, cfg) -> None:  # noqa: ANN001 - condhint.config.Config
        """Runs after every analysis that is still current. vscode-languageclient 9 pulls diagnostics only for
        documents shown in text tabs, never for notebook cells: a notebook's are pushed to pulling clients too."""
        if isinstance(state, NotebookState) and self.ls.pull:
            self.publish(state)
        super().enrich(state, cfg)

    def publish(self, state: DocumentState) -> None:
        if not isinstance(state, NotebookState):
            return super().publish(state)
        for cell in state.cells:
            self.ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(
                uri=cell.uri, diagnostics=cell_diagnostics(self.ls, state, cell)))


# ---- requests on a cell: translate to the joined text and back ---------------------------------------------
def _owner(ls: "CondhintServer", uri: str) -> tuple[NotebookState, Cell] | None:
    notebook = ls.workspace.get_notebook_document(cell_uri=uri)
    state = ls.docs.get(notebook.uri) if notebook is not None else None
    cell = state.cell(uri) if isinstance(state, NotebookState) else None
    return (state, cell) if cell is not None and cell.first >= 0 else None  # type: ignore[return-value]


async def pull_diagnostics(ls: "CondhintServer", params: types.DocumentDiagnosticParams
                           ) -> types.DocumentDiagnosticReport:
    owner = _owner(ls, params.text_document.uri)
    if owner is None:
        return await handlers.pull_diagnostics(ls, params)
    state, cell = owner
    await ls.analyser.result(state, 60.0)
    items = cell_diagnostics(ls, state, cell)
    rid = result_id(items)
    if params.previous_result_id == rid:
        return types.RelatedUnchangedDocumentDiagnosticReport(result_id=rid)
    return types.RelatedFullDocumentDiagnosticReport(items=items, result_id=rid)


async def hover(ls: "CondhintServer", params: types.HoverParams) -> types.Hover | None:
    owner = _owner(ls, params.text_document.uri)
    if owner is None:
        return await handlers.hover(ls, params)
    state, cell = owner
    moved = evolve(params, text_document=types.TextDocumentIdentifier(state.uri),
                    position=types.Position(params.position.line + cell.first, params.position.character))
    result = await handlers.hover(ls, moved)
    if result is not None and result.range is not None:
        result.range = _shift_range(result.range, -cell.first)
    return result


async def code_actions(ls: "CondhintServer", params: types.CodeActionParams) -> list[types.CodeAction] | None:
    owner = _owner(ls, params.text_document.uri)
    if owner is None:
        return await handlers.code_actions(ls, params)
    state, cell = owner
    moved = evolve(params, text_document=types.TextDocumentIdentifier(state.uri),
                    range=_shift_range(params.range, cell.first))
    actions = await handlers.code_actions(ls, moved) or []
    out = []
    for action in actions:
        if action.diagnostics:
            action.diagnostics = [evolve(d, range=_shift_range(d.range, -cell.first)) for d in action.diagnostics
                                  if cell.holds(d.range.start.line)] or None
        if action.edit is not None:
            action.edit = _to_cells(ls, state, action.edit)
            if action.edit is None:
                continue  # an edit that spans cells: not offered
        out.append(action)
    return out


def resolve_code_action(ls: "CondhintServer", action: types.CodeAction) -> types.CodeAction:
    action = handlers.resolve_code_action(ls, action)
    data = action.data if isinstance(action.data, dict) else {}
    state = ls.docs.get(str(data.get("uri", "")))
    if isinstance(state, NotebookState) and action.edit is not None:
        action.edit = _to_cells(ls, state, action.edit)
    return action


def _to_cells(ls: "CondhintServer", state: NotebookState, edit: types.WorkspaceEdit) -> types.WorkspaceEdit | None:
    """The edit of the joined text as edits of the cells; None if one text edit does not fit in one cell."""
    edits: list[types.TextEdit | types.SnippetTextEdit] = []
    for change in edit.document_changes or []:
        edits += [e for e in change.edits if isinstance(e, (types.TextEdit, types.SnippetTextEdit))]
    for uri_edits in (edit.changes or {}).values():
        edits += uri_edits
    by_cell: dict[str, list[types.TextEdit | types.SnippetTextEdit]] = {}
    for e in edits:
        cell = state.cell_at(e.range.start.line)
        end = e.range.end
        if cell is None or not (cell.holds(end.line) or (end.line == cell.first + cell.count and end.character == 0)):
            return None
        shifted = _shift_range(e.range, -cell.first)
        by_cell.setdefault(cell.uri, []).append(
            types.SnippetTextEdit(shifted, e.snippet) if isinstance(e, types.SnippetTextEdit)
            else types.TextEdit(shifted, e.new_text))
    if edit.document_changes is not None:
        version: Callable[[str], Any] = lambda uri: ls.workspace.get_text_document(uri).version
        return types.WorkspaceEdit(document_changes=[types.TextDocumentEdit(
            types.OptionalVersionedTextDocumentIdentifier(uri=uri, version=version(uri)), list(es))
            for uri, es in by_cell.items()])
    return types.WorkspaceEdit(changes=by_cell)
