"""Driving the real condhint server over stdio JSON-RPC with a pytest-lsp client and real client capabilities.

Every notification the tests wait for is recorded as it arrives, and waiters are registered *before* the
action that triggers the notification; every wait has a timeout.
"""
from __future__ import annotations

import asyncio
import os
import sys
from contextlib import asynccontextmanager
from pathlib import Path
from typing import Any, AsyncIterator, Callable

from lsprotocol import types
from pygls.protocol import default_converter
from pytest_lsp import LanguageClient, client_capabilities
from pytest_lsp.client import DEFAULT_CLIENT_FEATURES, register_lsp_features

SERVER = [sys.executable, "-m", "condhint", "serve", "--log-level", "info"]
TIMEOUT = 30.0  # seconds; generous for a loaded 2-core machine, never reached when things work
PUBLISH = types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS
SHOW = types.WINDOW_SHOW_MESSAGE

# Capability profiles shipped with pytest-lsp, recorded from the real editors.
VSCODE = "visual-studio-code"  # push diagnostics, UTF-16, codeAction/resolve for edits
NEOVIM = "neovim"  # latest: pull diagnostics, offers UTF-8, inlay hints
NEOVIM_07 = "neovim@v0.7.0"  # like Debian's 0.7.2: push, UTF-16, work-done progress
EMACS = "emacs"  # push, offers UTF-32/UTF-8/UTF-16, no codeAction/resolve (like eglot)


class Recorder:
    """Notifications by method, and futures waiting for one that satisfies a predicate."""

    def __init__(self) -> None:
        self.seen: dict[str, list[Any]] = {}
        self._waiters: list[tuple[str, Callable[[Any], bool], asyncio.Future]] = []

    def record(self, method: str, params: Any) -> None:
        self.seen.setdefault(method, []).append(params)
        for entry in list(self._waiters):
            m, pred, fut = entry
            if m == method and not fut.done() and pred(params):
                fut.set_result(params)
                self._waiters.remove(entry)

    def expect(self, method: str, pred: Callable[[Any], bool] = lambda p: True, *, past: bool = False
               ) -> asyncio.Future:
        """A future for the next notification of `method` satisfying `pred` (or an earlier one if `past`)."""
        fut = asyncio.get_running_loop().create_future()
        if past:
            for p in self.seen.get(method, []):
                if pred(p):
                    fut.set_result(p)
                    return fut
        self._waiters.append((method, pred, fut))
        return fut


def make_client() -> LanguageClient:
    client = LanguageClient(converter_factory=default_converter)
    recorder = Recorder()
    client.recorder = recorder  # type: ignore[attr-defined]
    features = dict(DEFAULT_CLIENT_FEATURES)
    default_publish = features[PUBLISH]

    def publish(c: LanguageClient, params: types.PublishDiagnosticsParams) -> None:
        default_publish(c, params)
        recorder.record(PUBLISH, params)

    def show(c: LanguageClient, params: types.ShowMessageParams) -> None:
        c.messages.append(params)
        recorder.record(SHOW, params)

    features[PUBLISH] = publish
    features[SHOW] = show
    register_lsp_features(client, features)
    return client


@asynccontextmanager
async def running(profile: str | types.ClientCapabilities, root: Path, init_options: Any = None, configuration: Any = None,
                  started: list | None = None) -> AsyncIterator[LanguageClient]:
    """A real server over stdio, initialised with the capabilities of `profile` (a pytest-lsp profile name or
    capabilities) and a workspace at `root`."""
    client = make_client()
    if configuration is not None:
        client.set_configuration(configuration, section="condhint")
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    await client.start_io(*SERVER, env=env, cwd=str(root))
    if started is not None:
        started.append(client)
    try:
        uri = root.resolve().as_uri()
        result = await asyncio.wait_for(client.initialize_session(types.InitializeParams(
            capabilities=client_capabilities(profile) if isinstance(profile, str) else profile, root_uri=uri,
            workspace_folders=[types.WorkspaceFolder(uri=uri, name=root.name)],
            initialization_options=init_options)), TIMEOUT)
        client.init_result = result  # type: ignore[attr-defined]
        yield client
        await asyncio.wait_for(client.shutdown_session(), TIMEOUT)
    finally:
        await client.stop()


def encoding_of(client: LanguageClient) -> str:
    enc = client.init_result.capabilities.position_encoding  # type: ignore[attr-defined]
    return str(getattr(enc, "value", enc) or "utf-16")


def units(text: str, encoding: str) -> int:
    """Length of `text` in the client's units, by Python's own codecs."""
    if encoding == "utf-8":
        return len(text.encode("utf-8"))
    if encoding == "utf-16":
        return len(text.encode("utf-16-le")) // 2
    return len(text)


def position(text: str, needle: str, encoding: str, occurrence: int = 0, at_end: bool = False) -> types.Position:
    """The client position of the start (or end) of the `occurrence`-th `needle` in `text`."""
    index = -1
    for _ in range(occurrence + 1):
        index = text.index(needle, index + 1)
    if at_end:
        index += len(needle)
    line = text.count("\n", 0, index)
    start = text.rfind("\n", 0, index) + 1
    return types.Position(line=line, character=units(text[start:index], encoding))


def range_of(text: str, needle: str, encoding: str, occurrence: int = 0) -> types.Range:
    return types.Range(start=position(text, needle, encoding, occurrence),
                       end=position(text, needle, encoding, occurrence, at_end=True))


def offset(text: str, pos: types.Position, encoding: str) -> int:
    lines = text.split("\n")
    base = sum(len(s) + 1 for s in lines[: pos.line])
    line = lines[pos.line] if pos.line < len(lines) else ""
    count = 0
    for i, ch in enumerate(line):
        if count >= pos.character:
            return base + i
        count += units(ch, encoding)
    return base + len(line)


def apply_edits(text: str, edits: list[types.TextEdit], encoding: str) -> str:
    """Apply LSP text edits the way an editor does (independently of the server's own helpers)."""
    spans = sorted(((offset(text, e.range.start, encoding), offset(text, e.range.end, encoding), e.new_text)
                    for e in edits), reverse=True)
    for a, b, new in spans:
        text = text[:a] + new + text[b:]
    return text


def edits_for(edit: types.WorkspaceEdit, uri: str) -> list[types.TextEdit]:
    if edit.changes:
        return list(edit.changes.get(uri, []))
    out: list[types.TextEdit] = []
    for change in edit.document_changes or []:
        if isinstance(change, types.TextDocumentEdit) and change.text_document.uri == uri:
            out += [e for e in change.edits if isinstance(e, types.TextEdit)]
    return out


async def within(fut: Any, timeout: float = TIMEOUT) -> Any:
    return await asyncio.wait_for(fut, timeout)


def open_document(client: LanguageClient, path: Path, text: str, version: int = 1) -> str:
    uri = path.resolve().as_uri()
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        text_document=types.TextDocumentItem(uri=uri, language_id="python", version=version, text=text)))
    return uri


def replace_all(client: LanguageClient, uri: str, text: str, version: int) -> None:
    """A change that sends the whole new text as one edit over the old text's full range."""
    client.text_document_did_change(types.DidChangeTextDocumentParams(
        text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
        content_changes=[types.TextDocumentContentChangeWholeDocument(text=text)]))


def expect_diagnostics(client: LanguageClient, uri: str, version: int | None = None) -> asyncio.Future:
    rec: Recorder = client.recorder  # type: ignore[attr-defined]
    return rec.expect(PUBLISH, lambda p: p.uri == uri and (version is None or p.version == version))
