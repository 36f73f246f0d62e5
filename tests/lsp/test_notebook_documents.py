"""Notebook documents (LSP 3.17 notebookDocument/*) end to end over stdio: diagnostics on the right cell and
line, names from earlier cells, IPython magics and shell escapes never reported, hover and a quick fix inside a
cell, edits, half-typed cells and closing."""
from __future__ import annotations

import ast
import asyncio

import pytest
from lsprotocol import types

from lsp_support import NEOVIM, PUBLISH, VSCODE, apply_edits, edits_for, encoding_of, position, range_of, within
from pytest_lsp import client_capabilities

pytestmark = pytest.mark.asyncio

CELLS = [
    ("code", "import math\n%timeit math.sqrt(2.0)\n!ls\n"),
    ("markdown", "# The gap between neighbouring square roots\n"),
    ("code", "%%time\nscale = 2.0\n"),
    ("code", "def gap(x):  # condhint: 1e6 <= x <= 1e15\n    return math.sqrt(x + 1) - math.sqrt(x)\n"),
    ("code", "def growth(x):  # condhint: 1e-8 <= x <= 1e-2\n    return math.exp(x) - 1.0\n"),
]
GAP = CELLS[3][1]
GROWTH = CELLS[4][1]
FIX_WAIT = 150.0  # s: rewrites are searched in the background; on a loaded machine this can take a while


def with_notebooks(profile: str) -> types.ClientCapabilities:
    """The editor's capabilities plus notebook synchronisation, as VS Code 1.82+ declares it."""
    caps = client_capabilities(profile)
    caps.notebook_document = types.NotebookDocumentClientCapabilities(
        synchronization=types.NotebookDocumentSyncClientCapabilities(execution_summary_support=True))
    return caps


def cell_uri(notebook: str, i: int) -> str:
    return f"vscode-notebook-cell:{notebook}#C{i}"


def open_notebook(client, tmp_path, cells=CELLS) -> tuple[str, list[str]]:  # noqa: ANN001
    nb = (tmp_path / "roots.ipynb").resolve().as_uri()
    uris = [cell_uri(nb, i) for i in range(len(cells))]
    client.notebook_document_did_open(types.DidOpenNotebookDocumentParams(
        notebook_document=types.NotebookDocument(
            uri=nb, notebook_type="jupyter-notebook", version=1,
            cells=[types.NotebookCell(kind=types.NotebookCellKind.Code if k == "code" else types.NotebookCellKind.Markup,
                                      document=u) for (k, _), u in zip(cells, uris)]),
        cell_text_documents=[types.TextDocumentItem(uri=u, language_id="python" if k == "code" else "markdown",
                                                    version=1, text=t) for (k, t), u in zip(cells, uris)]))
    return nb, uris


def published(client, uri: str, pred=lambda p: True, past: bool = False):  # noqa: ANN001
    return client.recorder.expect(PUBLISH, lambda p: p.uri == uri and pred(p), past=past)


def change_cell(client, nb: str, uri: str, version: int, text: str) -> None:  # noqa: ANN001
    client.notebook_document_did_change(types.DidChangeNotebookDocumentParams(
        notebook_document=types.VersionedNotebookDocumentIdentifier(uri=nb, version=version),
        change=types.NotebookDocumentChangeEvent(cells=types.NotebookDocumentCellChanges(text_content=[
            types.NotebookDocumentCellContentChanges(
                document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
                changes=[types.TextDocumentContentChangeWholeDocument(text=text)])]))))


async def test_server_advertises_notebook_sync_for_python_cells(lsp):
    client = await lsp(with_notebooks(VSCODE))
    sync = client.init_result.capabilities.notebook_document_sync
    assert sync is not None and sync.save
    assert [c.language for f in sync.notebook_selector for c in f.cells] == ["python"]


async def test_clients_without_notebook_support_are_not_offered_it(lsp):
    client = await lsp(VSCODE)
    assert client.init_result.capabilities.notebook_document_sync is None


async def test_diagnostic_on_the_cell_and_line_with_names_from_earlier_cells(lsp, tmp_path):
    client = await lsp(with_notebooks(VSCODE), init_options={"debounceMs": 10})
    nb = (tmp_path / "roots.ipynb").resolve().as_uri()
    uris = [cell_uri(nb, i) for i in range(len(CELLS))]
    waits = [published(client, uris[i]) for i in (0, 2, 3)]
    open_notebook(client, tmp_path)
    first, timed, gap = [(await within(w)).diagnostics for w in waits]
    assert list(first) == [] and list(timed) == []  # %timeit, !ls and %%time are not syntax errors (no CH001)
    assert [d.code for d in gap] == ["CH101"]
    enc = encoding_of(client)
    assert gap[0].range == range_of(GAP, "math.sqrt(x + 1) - math.sqrt(x)", enc)  # line 1 of the cell, not of the notebook
    assert not any(p.uri == nb for p in client.recorder.seen.get(PUBLISH, []))  # nothing on the notebook itself


async def test_hover_and_quick_fix_inside_a_cell(lsp, tmp_path):
    client = await lsp(with_notebooks(VSCODE), init_options={"debounceMs": 10})
    nb = (tmp_path / "roots.ipynb").resolve().as_uri()
    target = cell_uri(nb, 3)
    wait = published(client, target, lambda p: p.diagnostics)
    open_notebook(client, tmp_path)
    diagnostics = (await within(wait)).diagnostics
    enc = encoding_of(client)
    hover = await within(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=target), position=position(GAP, " - ", enc))))
    assert hover is not None and "κ" in hover.contents.value
    assert hover.range is not None and hover.range.start.line == 1  # in cell coordinates
    # The quick fix of the last cell (expm1) edits that cell only, in its own lines.
    target = cell_uri(nb, 4)
    diagnostics = (await within(published(client, target, lambda p: p.diagnostics, past=True))).diagnostics
    deadline = asyncio.get_running_loop().time() + FIX_WAIT
    while True:  # offered once the background search has verified it
        actions = await within(client.text_document_code_action_async(types.CodeActionParams(
            text_document=types.TextDocumentIdentifier(uri=target), range=diagnostics[0].range,
            context=types.CodeActionContext(diagnostics=diagnostics, only=[types.CodeActionKind.QuickFix]))))
        fix = next((a for a in actions if a.is_preferred), None)
        if fix is not None or asyncio.get_running_loop().time() > deadline:
            break
    assert fix is not None, [a.title for a in actions]
    if fix.edit is None:
        fix = await within(client.code_action_resolve_async(fix))
    assert fix.edit is not None
    changed = {c.text_document.uri for c in fix.edit.document_changes or []} | set(fix.edit.changes or {})
    assert changed == {target}
    fixed = apply_edits(GROWTH, edits_for(fix.edit, target), enc)
    ast.parse(fixed)
    assert "expm1(x)" in fixed and "exp(x) - 1.0" not in fixed
    # The server re-reads the fixed cell and finds nothing left to report there.
    cleared = published(client, target, lambda p: not p.diagnostics)
    change_cell(client, nb, target, 2, fixed)
    await within(cleared)


async def test_edits_half_typed_cells_and_close(lsp, tmp_path):
    client = await lsp(with_notebooks(VSCODE), init_options={"debounceMs": 10})
    nb = (tmp_path / "roots.ipynb").resolve().as_uri()
    uris = [cell_uri(nb, i) for i in range(len(CELLS))]
    wait = published(client, uris[3], lambda p: p.diagnostics)
    open_notebook(client, tmp_path)
    await within(wait)
    # A half-typed first cell: CH001 on it, and the later cell is still analysed (without `math` it reads
    # the call as unknown, so its finding goes away: the later cell really sees the earlier one).
    broken = published(client, uris[0], lambda p: [d.code for d in p.diagnostics] == ["CH001"])
    gap = published(client, uris[3])
    change_cell(client, nb, uris[0], 2, "import math\ndef half(:\n")
    assert (await within(broken)).diagnostics[0].range.start.line == 1
    assert [d.code for d in (await within(gap)).diagnostics] == []
    restored = published(client, uris[3], lambda p: p.diagnostics)
    change_cell(client, nb, uris[0], 3, CELLS[0][1])
    await within(restored)
    closed = published(client, uris[3], lambda p: not p.diagnostics)
    client.notebook_document_did_close(types.DidCloseNotebookDocumentParams(
        notebook_document=types.NotebookDocumentIdentifier(uri=nb),
        cell_text_documents=[types.TextDocumentIdentifier(uri=u) for u in uris]))
    await within(closed)


async def test_pull_diagnostics_for_a_cell(lsp, tmp_path):
    client = await lsp(with_notebooks(NEOVIM), init_options={"debounceMs": 10})
    _, uris = open_notebook(client, tmp_path)
    report = await within(client.text_document_diagnostic_async(types.DocumentDiagnosticParams(
        text_document=types.TextDocumentIdentifier(uri=uris[3]))))
    assert [d.code for d in report.items] == ["CH101"]
    assert report.items[0].range.start.line == 1
    first = await within(client.text_document_diagnostic_async(types.DocumentDiagnosticParams(
        text_document=types.TextDocumentIdentifier(uri=uris[0]))))
    assert list(first.items) == []
    # Pushed as well: vscode-languageclient never pulls for notebook cells.
    pushed = await within(published(client, uris[3], lambda p: p.diagnostics, past=True))
    assert [d.code for d in pushed.diagnostics] == ["CH101"]
