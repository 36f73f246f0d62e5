"""The condhint language server: state, negotiated capabilities, and the table of handlers.

Handlers live in `handlers` and stay thin: fetch the document, call the core, convert with `convert`.
"""
from __future__ import annotations

import asyncio
import logging
from pathlib import Path
from typing import Any, Generator

from lsprotocol import types
from pygls.capabilities import get_capability
from pygls.exceptions import JsonRpcException, JsonRpcInvalidRequest
from pygls.lsp.server import LanguageServer
from pygls.protocol import LanguageServerProtocol
from pygls.protocol.json_rpc import RPCRequest
from pygls.protocol.language_server import lsp_method
from pygls.uris import to_fs_path
from pygls.workspace.position_codec import PositionCodec

from condhint import __version__
from condhint.config import Config
from condhint.lsp import handlers, notebook
from condhint.lsp.actions import KINDS
from condhint.lsp.background import Background
from condhint.lsp.settings import Settings
from condhint.lsp.state import Documents

log = logging.getLogger(__name__)

STATISTICS_COMMAND = "condhint.statistics"


class CondhintProtocol(LanguageServerProtocol):
    """pygls' protocol with our negotiation: UTF-8 positions whenever the client offers them (else UTF-16),
    and capabilities that match the client (pull diagnostics only for clients that pull)."""

    @lsp_method(types.INITIALIZE)
    def lsp_initialize(self, params: types.InitializeParams) -> Generator[Any, Any, types.InitializeResult]:
        general = params.capabilities.general
        if general is not None and general.position_encodings:
            utf8 = types.PositionEncodingKind.Utf8 in general.position_encodings
            general.position_encodings = [types.PositionEncodingKind.Utf8 if utf8 else types.PositionEncodingKind.Utf16]
        result = yield from super().lsp_initialize(params)
        caps = result.capabilities
        server: CondhintServer = self._server  # type: ignore[assignment]
        if not server.pull:
            caps.diagnostic_provider = None
        if get_capability(params.capabilities, "text_document.inlay_hint") is None:
            caps.inlay_hint_provider = None
        if get_capability(params.capabilities, "text_document.code_action.code_action_literal_support") is None:
            caps.code_action_provider = True
        return result


    def structure_message(self, data: dict[str, Any]) -> Any:
        """pygls logs and drops a request whose parameters do not fit the protocol's types (a negative
        position, `"params": "x"`), so its client would wait forever: answer it with InvalidParams (JSON-RPC
        2.0, §5.1). Notifications get no answer, as the protocol says."""
        try:
            return super().structure_message(data)
        except JsonRpcException as exc:
            if isinstance(data, dict) and "method" in data and isinstance(data.get("id"), (int, str)):
                self._send_response(data["id"], None, exc.to_response_error())
            raise

    def handle_message(self, message: Any) -> None:
        """After `shutdown`, requests are refused with InvalidRequest (LSP 3.17, shutdown); pygls drops them.
        A diagnostic pull is declined the way LSP provides for it (ServerCancelled, retriggerRequest false),
        which clients take quietly: Neovim 0.11 pulls while it stops a client, and shows other errors."""
        if self._shutdown and isinstance(message, RPCRequest) and message.method != types.EXIT:
            log.info("refused %s: the server is shutting down", message.method)
            if message.method == types.TEXT_DOCUMENT_DIAGNOSTIC:
                error = types.ResponseError(types.LSPErrorCodes.ServerCancelled, "the server is shutting down",
                                            types.DiagnosticServerCancellationData(retrigger_request=False))
            else:
                error = JsonRpcInvalidRequest("the server is shutting down").to_response_error()
            self._send_response(message.id, None, error)
            return
        super().handle_message(message)

    def _check_handler_result(self, future: Any) -> None:
        """pygls 2.1 keeps the future of every handled notification; forget each one once it is done, or a
        long editing session grows by a few KiB per keystroke (measured by tests/benchmarks/soak_lsp.py)."""
        super()._check_handler_result(future)
        if future.cancelled():
            return  # pygls cancels while iterating over the futures (shutdown) and pops them itself ($/cancelRequest)
        for key, fut in list(self._request_futures.items()):
            if fut is future:
                self._request_futures.pop(key, None)
                break


class CondhintServer(LanguageServer):
    def __init__(self) -> None:
        super().__init__("condhint", __version__, protocol_cls=CondhintProtocol,
                         notebook_document_sync=notebook.NOTEBOOK_SYNC)
        self.docs = Documents()
        self.settings = Settings(Config())
        self.init_options: Any = None
        self.workspace_settings: Any = None
        self.root: Path | None = None
        self.pull = False
        self.loop: asyncio.AbstractEventLoop | None = None
        self.shut_down = False
        self.last_message: str | None = None
        self.analyser = notebook.NotebookAnalyser(self)
        self.background = Background()

    # ---- what the client declared -------------------------------------------------------------------------
    def client_has(self, path: str) -> bool:
        return bool(get_capability(self.client_capabilities, path, None))

    @property
    def codec(self) -> PositionCodec:
        return self.workspace.position_codec

    @property
    def related_information(self) -> bool:
        return self.client_has("text_document.publish_diagnostics.related_information")

    @property
    def can_report_progress(self) -> bool:
        return self.client_has("window.work_done_progress")

    @property
    def markdown_hover(self) -> bool:
        formats = get_capability(self.client_capabilities, "text_document.hover.content_format", None) or []
        return types.MarkupKind.Markdown in formats or not formats

    @property
    def resolve_edits(self) -> bool:
        props = get_capability(self.client_capabilities, "text_document.code_action.resolve_support.properties",
                               None) or []
        return "edit" in props

    @property
    def document_changes(self) -> bool:
        return self.client_has("workspace.workspace_edit.document_changes")

    @property
    def snippet_edits(self) -> bool:
        return self.client_has("workspace.workspace_edit.snippet_edit_support")

    # ---- messages -----------------------------------------------------------------------------------------
    def tell(self, message: str, error: bool = False) -> None:
        kind = types.MessageType.Error if error else types.MessageType.Warning
        self.window_show_message(types.ShowMessageParams(type=kind, message=message))

    def path_of(self, uri: str) -> str:
        return to_fs_path(uri) or uri


class ClientLog(logging.Handler):
    """Forwards the server's own log records (info and above) to the client's log (window/logMessage)."""

    def __init__(self, ls: "CondhintServer") -> None:
        super().__init__(logging.INFO)
        self.ls = ls

    def emit(self, record: logging.LogRecord) -> None:
        loop = self.ls.loop
        if loop is None or loop.is_closed():
            return
        kind = (types.MessageType.Error if record.levelno >= logging.ERROR else
                types.MessageType.Warning if record.levelno >= logging.WARNING else types.MessageType.Info)
        params = types.LogMessageParams(type=kind, message=self.format(record))
        loop.call_soon_threadsafe(self.ls.window_log_message, params)


def features() -> list[tuple[str, Any, Any]]:
    """(method, options, handler) for every feature the server offers."""
    return [
        (types.INITIALIZE, None, handlers.initialize),
        (types.INITIALIZED, None, handlers.initialized),
        (types.SHUTDOWN, None, handlers.shutdown),
        (types.EXIT, None, handlers.exit_now),
        (types.TEXT_DOCUMENT_DID_OPEN, None, handlers.did_open),
        (types.TEXT_DOCUMENT_DID_CHANGE, None, handlers.did_change),
        (types.TEXT_DOCUMENT_DID_SAVE, types.SaveOptions(include_text=False), handlers.did_save),
        (types.TEXT_DOCUMENT_DID_CLOSE, None, handlers.did_close),
        (types.NOTEBOOK_DOCUMENT_DID_OPEN, None, notebook.did_open),
        (types.NOTEBOOK_DOCUMENT_DID_CHANGE, None, notebook.did_change),
        (types.NOTEBOOK_DOCUMENT_DID_SAVE, None, notebook.did_save),
        (types.NOTEBOOK_DOCUMENT_DID_CLOSE, None, notebook.did_close),
        (types.WORKSPACE_DID_CHANGE_CONFIGURATION, None, handlers.did_change_configuration),
        (types.TEXT_DOCUMENT_HOVER, None, notebook.hover),
        (types.TEXT_DOCUMENT_INLAY_HINT, types.InlayHintOptions(resolve_provider=False), handlers.inlay_hints),
        (types.TEXT_DOCUMENT_CODE_ACTION, types.CodeActionOptions(code_action_kinds=list(KINDS),
                                                                  resolve_provider=True), notebook.code_actions),
        (types.CODE_ACTION_RESOLVE, None, notebook.resolve_code_action),
        (types.TEXT_DOCUMENT_DIAGNOSTIC, types.DiagnosticOptions(identifier="condhint", inter_file_dependencies=False,
                                                                 workspace_diagnostics=False), notebook.pull_diagnostics),
    ]


def create_server() -> CondhintServer:
    ls = CondhintServer()
    for method, options, handler in features():
        ls.feature(method, options)(handler)
    ls.command(STATISTICS_COMMAND)(handlers.statistics)
    return ls
