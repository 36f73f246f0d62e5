"""Editing end to end: columns in the negotiated encoding, half-typed code, bursts of edits, reuse,
cancellation and progress."""
from __future__ import annotations

import asyncio

import pytest
from lsprotocol import types
from pygls.exceptions import JsonRpcRequestCancelled
from pytest_lsp import client_capabilities

from lsp_support import (EMACS, NEOVIM, NEOVIM_07, VSCODE, encoding_of, expect_diagnostics, open_document, position,
                         range_of, replace_all, units, within)
from lsp_samples import GROWTH, UNICODE

pytestmark = pytest.mark.asyncio


async def pulled(client, uri: str) -> list[types.Diagnostic]:
    result = await within(client.text_document_diagnostic_async(types.DocumentDiagnosticParams(
        text_document=types.TextDocumentIdentifier(uri=uri))))
    return list(result.items)


@pytest.mark.parametrize("profile, expected", [(VSCODE, "utf-16"), (NEOVIM_07, "utf-16"), (NEOVIM, "utf-8"),
                                               (EMACS, "utf-8")])
async def test_columns_after_non_ascii_identifiers_and_an_emoji(lsp, tmp_path, profile, expected):
    client = await lsp(profile, init_options={"debounceMs": 10})
    assert encoding_of(client) == expected  # UTF-8 whenever offered, else UTF-16
    path = tmp_path / "unicode.py"
    uri = path.resolve().as_uri()
    pushed = expect_diagnostics(client, uri, version=1)
    open_document(client, path, UNICODE)
    if client.init_result.capabilities.diagnostic_provider:
        diags = await pulled(client, uri)
    else:
        diags = list((await within(pushed)).diagnostics)
    assert [d.code for d in diags] == ["CH101"]
    rng = diags[0].range
    line = UNICODE.splitlines()[rng.start.line]
    before = line[: line.index("math.exp(θ) - 1.0")]
    # Columns by Python's own codecs: the emoji is 2 UTF-16 units and 4 UTF-8 bytes, θ 1 unit / 2 bytes.
    assert rng.start.character == units(before, expected)
    assert rng.end.character == units(before + "math.exp(θ) - 1.0", expected)
    assert units(before, "utf-16") != units(before, "utf-8") != len(before)
    # A hover placed in client units on `θ)` inside the call lands on `math.exp(θ)`.
    at = position(UNICODE, "θ) - 1.0", expected)
    h = await within(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=uri), position=at)))
    assert "**condhint** `math.exp(θ)`" in h.contents.value
    assert h.range == range_of(UNICODE, "math.exp(θ)", expected)


async def test_half_typed_code_keeps_the_other_functions(lsp, tmp_path):
    client = await lsp(VSCODE, init_options={"debounceMs": 10})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    first = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    before = list((await within(first)).diagnostics)
    # Typing mid-word inside `fraction_grown`: `exp(rate` becomes `exp(ra te` (a syntax error).
    broken = GROWTH.replace("exp(rate * dt)", "exp(ra te * dt)")
    second = expect_diagnostics(client, uri, version=2)
    replace_all(client, uri, broken, 2)
    during = list((await within(second)).diagnostics)
    errors = [d for d in during if d.code == "CH001"]
    assert len(errors) == 1 and "syntax error" in errors[0].message  # one message, no spam
    assert errors[0].range.start.line == range_of(broken, "ra te", "utf-16").start.line
    kept = [(d.code, d.range) for d in during if d.code != "CH001"]
    # Every finding outside the broken function is still there, at the same place.
    broken_line = range_of(GROWTH, "exp(rate * dt) - 1", "utf-16").start.line
    assert kept == [(d.code, d.range) for d in before if d.range.start.line != broken_line]
    assert kept
    third = expect_diagnostics(client, uri, version=3)
    replace_all(client, uri, GROWTH, 3)
    assert [(d.code, d.range) for d in (await within(third)).diagnostics] == [(d.code, d.range) for d in before]


async def test_burst_of_50_edits_ends_with_the_last_version_only(lsp, tmp_path):
    client = await lsp(NEOVIM_07, init_options={"debounceMs": 30})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    first = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    await within(first)
    base = range_of(GROWTH, "exp(rate * dt) - 1", "utf-16").start.line
    last = expect_diagnostics(client, uri, version=51)
    # Each edit adds a comment line at the top, so the flagged line of version v is base + v - 1.
    for v in range(2, 52):
        client.text_document_did_change(types.DidChangeTextDocumentParams(
            text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=v),
            content_changes=[types.TextDocumentContentChangePartial(
                range=types.Range(start=types.Position(line=0, character=0), end=types.Position(line=0, character=0)),
                text=f"# edit {v}\n")]))
    final = await within(last)
    published = [p for p in client.recorder.seen[types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS] if p.uri == uri]
    assert published[-1] is final
    versions = [p.version for p in published]
    assert versions == sorted(versions) and len(set(versions)) == len(versions)
    assert len(published) < 20  # debounced: far fewer analyses than edits
    for p in published:
        flagged = [d for d in p.diagnostics if d.code == "CH101" and "exp(rate" in d.message]
        assert [d.range.start.line for d in flagged] == [base + p.version - 1]


async def test_an_edit_reanalyses_only_what_changed(lsp, tmp_path):
    client = await lsp(VSCODE, init_options={"debounceMs": 10})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    first = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    await within(first)

    async def stats():
        return await within(client.workspace_execute_command_async(types.ExecuteCommandParams(
            command="condhint.statistics", arguments=[uri])))

    s1 = await stats()
    assert s1["analysed"] == s1["pieces"] == 5  # the module-level code and four functions
    second = expect_diagnostics(client, uri, version=2)
    replace_all(client, uri, GROWTH.replace("log(1 + fraction)", "log(1 + 2 * fraction)"), 2)
    await within(second)
    s2 = await stats()
    assert (s2["analysed"], s2["reused"], s2["expressions_analysed"]) == (1, 4, 1)
    # An edit that only moves code (a blank line in a function) re-reads that function and the module-level
    # code (whose positions moved), but analyses no expression again.
    third = expect_diagnostics(client, uri, version=3)
    replace_all(client, uri, GROWTH.replace("def strain(ratio: float) -> float:\n",
                                            "def strain(ratio: float) -> float:\n\n"), 3)
    await within(third)
    s3 = await stats()
    assert s3["expressions_analysed"] == 0 and s3["analysed"] <= 2


def big_module(functions: int) -> str:
    """Distinct formulas (distinct constants), so nothing is shared between them."""
    out = ["import math", ""]
    for i in range(functions):
        out += [f"def f{i}(x):", "    # condhint: 1e-9 <= x <= 1e-3",
                f"    return math.exp(x * {1 + i / 1000:.4f}) - 1.0 + x * {i + 0.5}", ""]
    return "\n".join(out)


async def test_cancel_request_is_honoured(lsp, tmp_path):
    client = await lsp(VSCODE, init_options={"debounceMs": 10})
    text = big_module(150)
    path = tmp_path / "big.py"
    uri = open_document(client, path, text)
    # The hover waits for the analysis of the whole file (seconds); cancel it meanwhile.
    msg_id = "hover-to-cancel"
    fut = client.protocol.send_request(types.TEXT_DOCUMENT_HOVER, types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=uri), position=types.Position(line=4, character=12)),
        msg_id=msg_id)
    client.protocol.notify(types.CANCEL_REQUEST, types.CancelParams(id=msg_id))
    with pytest.raises(JsonRpcRequestCancelled):
        await within(asyncio.wrap_future(fut))
    # The server goes on: a later hover is answered.
    h = await within(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=uri), position=types.Position(line=4, character=12))), 120)
    assert h is not None and "κ ≈" in h.contents.value


async def test_work_done_progress_for_a_long_analysis(lsp, tmp_path):
    client = await lsp(NEOVIM_07, init_options={"debounceMs": 10})  # declares window.workDoneProgress
    path = tmp_path / "big.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, big_module(150))
    await within(done, 120)
    reports = [r for rs in client.progress_reports.values() for r in rs]
    kinds = [r.kind for r in reports]
    assert kinds[0] == "begin" and kinds[-1] == "end"
    assert reports[0].title == "condhint"


async def test_no_progress_for_clients_that_do_not_declare_it(lsp, tmp_path):
    caps = client_capabilities(VSCODE)
    caps.window.work_done_progress = False  # as eglot 1.9, which declares no work-done progress
    client = await lsp(caps, init_options={"debounceMs": 10})
    path = tmp_path / "big.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, big_module(150))
    await within(done, 120)
    assert client.progress_reports == {}
