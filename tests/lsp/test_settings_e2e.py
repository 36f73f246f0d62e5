"""Settings end to end: pyproject.toml < initializationOptions < workspace/configuration; invalid values give
one message and fall back; didChangeConfiguration re-analyses; inlay hints only when switched on."""
from __future__ import annotations

import pytest
from lsprotocol import types

from lsp_support import (NEOVIM, NEOVIM_07, SHOW, VSCODE, encoding_of, expect_diagnostics, open_document, position,
                         within)
from lsp_samples import GROWTH

pytestmark = pytest.mark.asyncio


def severities(params: types.PublishDiagnosticsParams) -> list[tuple[str, int]]:
    return sorted((d.code, d.severity) for d in params.diagnostics)


async def test_invalid_settings_give_one_message_and_defaults(lsp, tmp_path):
    bad = {"condhint": {"samples": -3, "minSeverity": "loud", "debounceMs": 10}}
    client = await lsp(VSCODE, init_options=bad)
    shown = client.recorder.expect(SHOW, past=True)
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    message = await within(shown)
    assert message.type == types.MessageType.Warning
    assert "`samples`" in message.message and "`minSeverity`" in message.message
    assert len(client.recorder.seen[SHOW]) == 1
    # The valid setting is used, the invalid ones fall back: diagnostics as with the defaults.
    assert [d.code for d in (await within(done)).diagnostics].count("CH101") == 2


async def test_pyproject_then_workspace_configuration(lsp, tmp_path):
    # pyproject.toml makes every finding from 2 digits an error …
    (tmp_path / "pyproject.toml").write_text("[tool.condhint]\nthresholds = {info = 2, warning = 2, error = 2}\n")
    # … and the client's configuration raises the error threshold back to 13 digits.
    client = await lsp(VSCODE, init_options={"debounceMs": 10}, configuration={"thresholds": {"error": 13}})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    first = await within(done)
    # 11.9 digits lost (exp(x) - 1 and log(1 + x)) and 4 digits at risk (ratio - 1): warnings now.
    assert severities(first) == [("CH101", 2), ("CH101", 2), ("CH201", 2)]
    # didChangeConfiguration re-analyses with the new configuration (asked with workspace/configuration).
    client.set_configuration({"minSeverity": "error"}, section="condhint")
    again = expect_diagnostics(client, uri)
    client.workspace_did_change_configuration(types.DidChangeConfigurationParams(settings=None))
    second = await within(again)
    assert severities(second) == [("CH101", 1), ("CH101", 1), ("CH201", 1)]  # pyproject's thresholds, errors


async def test_settings_pushed_with_did_change_configuration(lsp, tmp_path):
    # Neovim 0.7 declares no workspace/configuration: it pushes its settings instead.
    client = await lsp(NEOVIM_07, init_options={"condhint": {"debounceMs": 10}})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    assert len((await within(done)).diagnostics) == 3
    again = expect_diagnostics(client, uri)
    client.workspace_did_change_configuration(types.DidChangeConfigurationParams(
        settings={"condhint": {"minSeverity": "error"}}))
    assert [d.code for d in (await within(again)).diagnostics] == ["CH101", "CH101"]


async def test_inlay_hints_are_off_by_default_and_compact_when_on(lsp, tmp_path):
    client = await lsp(NEOVIM)
    path = tmp_path / "growth.py"
    uri = open_document(client, path, GROWTH)
    whole = types.Range(start=types.Position(line=0, character=0), end=types.Position(line=40, character=0))
    params = types.InlayHintParams(text_document=types.TextDocumentIdentifier(uri=uri), range=whole)
    assert client.init_result.capabilities.inlay_hint_provider is not None
    assert list(await within(client.text_document_inlay_hint_async(params))) == []
    client.set_configuration({"inlayHints": True}, section="condhint")
    client.workspace_did_change_configuration(types.DidChangeConfigurationParams(settings=None))
    hints = []
    while not hints:  # the new settings apply once the server has asked for them
        hints = await within(client.text_document_inlay_hint_async(params))
    labels = {(h.position.line, h.position.character): h.label for h in hints}
    enc = encoding_of(client)
    end = position(GROWTH, "exp(rate * dt) - 1", enc, at_end=True)
    assert labels[(end.line, end.character)].startswith("−11.") and labels[(end.line, end.character)].endswith(" digits")
    end = position(GROWTH, "ratio - 1.0", enc, at_end=True)
    assert labels[(end.line, end.character)] == "κ≈1e4"  # κ of x - 1 at 1.0001 (common practice)
