"""The real server over stdio, fed what a broken or hostile client sends: it answers with errors or ignores
the message, keeps serving, and exits cleanly on exit or end of input. Framing is written by hand."""
from __future__ import annotations

import json
import time

import pytest

from tests.robustness.lsp_raw import RawServer

DOC = "file:///tmp/condhint-resilience/demo.py"
TEXT = "import math\n\n\ndef f(n):\n    return math.sqrt(n + 1) - math.sqrt(n)\n"


@pytest.fixture
def server():
    s = RawServer()
    s.initialize()
    yield s
    if s.proc.poll() is None:
        s.close()


def _ch101(diag: dict) -> bool:
    return any(d.get("code") == "CH101" for d in diag["params"]["diagnostics"])


def test_malformed_json_is_survived(server: RawServer) -> None:
    server.send_raw(b"Content-Length: 5\r\n\r\n{oops")
    server.send_raw(b"Content-Length: 2\r\n\r\n[]")
    server.send_raw(b'Content-Length: 13\r\n\r\n"just a text"')
    server.send_raw(b'Content-Length: 17\r\n\r\n{"jsonrpc":"2.0"}')
    assert server.alive()
    server.open(DOC, TEXT)
    assert _ch101(server.diagnostics(DOC))


def test_header_without_content_length_is_survived(server: RawServer) -> None:
    server.send_raw(b"Content-Type: application/vscode-jsonrpc; charset=utf-8\r\n\r\n")
    assert server.alive()


def test_unknown_methods(server: RawServer) -> None:
    m = server.call("condhint/noSuchThing", {"a": 1})
    assert m["error"]["code"] == -32601  # MethodNotFound (JSON-RPC 2.0 specification)
    server.notify("condhint/noSuchNotification", {})
    server.notify("$/noSuchProtocolNotification", {})
    assert server.alive()


def test_wrong_parameter_shapes(server: RawServer) -> None:
    # A request whose parameters do not fit the protocol's types is answered with InvalidParams (-32602,
    # JSON-RPC 2.0 §5.1), and the server goes on serving.
    for params in ("x", [1, 2], {"textDocument": 3}, {"textDocument": {"uri": DOC}, "position": {"line": "a"}}):
        m = server.call("textDocument/hover", params)
        assert m["error"]["code"] == -32602, m
    server.notify("textDocument/didOpen", {"textDocument": 5})  # a notification: no answer, no crash
    assert server.alive()
    server.open(DOC, TEXT)
    assert _ch101(server.diagnostics(DOC))


def test_unknown_documents(server: RawServer) -> None:
    for method, extra in (("textDocument/hover", {"position": {"line": 0, "character": 0}}),
                          ("textDocument/codeAction", {"range": {"start": {"line": 0, "character": 0},
                                                                 "end": {"line": 0, "character": 1}},
                                                       "context": {"diagnostics": []}})):
        m = server.call(method, {"textDocument": {"uri": "file:///never/opened.py"}, **extra})
        assert "error" in m or not m.get("result"), m
    server.notify("textDocument/didClose", {"textDocument": {"uri": "file:///never/opened.py"}})
    assert server.alive()


def test_out_of_range_positions(server: RawServer) -> None:
    server.open(DOC, TEXT)
    server.diagnostics(DOC)
    # Negative positions are outside the protocol's uinteger: InvalidParams, and the server goes on.
    m = server.call("textDocument/hover", {"textDocument": {"uri": DOC}, "position": {"line": -1, "character": -1}})
    assert m["error"]["code"] == -32602, m
    for line, ch in ((10_000, 0), (4, 10_000), (2**31 - 1, 2**31 - 1), (0, 0)):
        m = server.call("textDocument/hover", {"textDocument": {"uri": DOC}, "position": {"line": line,
                                                                                        "character": ch}})
        assert "result" in m or "error" in m
        m = server.call("textDocument/codeAction", {
            "textDocument": {"uri": DOC}, "range": {"start": {"line": line, "character": ch},
                                                    "end": {"line": line, "character": ch}},
            "context": {"diagnostics": []}})
        assert "result" in m or "error" in m
    # an edit whose range lies past the end of the document
    server.notify("textDocument/didChange", {
        "textDocument": {"uri": DOC, "version": 2},
        "contentChanges": [{"range": {"start": {"line": 500, "character": 3}, "end": {"line": 900, "character": 0}},
                            "text": "x = 1.0\n"}]})
    assert server.alive()


def test_change_before_open_is_ignored(server: RawServer) -> None:
    server.notify("textDocument/didChange", {"textDocument": {"uri": DOC, "version": 5},
                                             "contentChanges": [{"text": "y = 2.0\n"}]})
    server.notify("textDocument/didChange", {"textDocument": {"uri": DOC, "version": 6},
                                             "contentChanges": [{"range": {"start": {"line": 0, "character": 0},
                                                                           "end": {"line": 0, "character": 0}},
                                                                 "text": "z"}]})
    assert server.alive()
    server.open(DOC, TEXT, version=7)
    assert _ch101(server.diagnostics(DOC, 7))


def test_many_quick_edits_end_with_the_last_version(server: RawServer) -> None:
    server.open(DOC, TEXT)
    for v in range(2, 60):
        body = TEXT if v % 2 else TEXT.replace("math.sqrt(n + 1) - math.sqrt(n)", "2.0 * n")
        server.notify("textDocument/didChange", {"textDocument": {"uri": DOC, "version": v},
                                                 "contentChanges": [{"text": body}]})
    last = server.diagnostics(DOC, 59, timeout=60)
    assert _ch101(last)  # version 59 is odd: the cancelling formula


def test_exit_after_shutdown_is_clean() -> None:
    s = RawServer()
    s.initialize()
    s.open(DOC, TEXT)
    s.diagnostics(DOC)
    assert s.close() == 0


def test_end_of_input_ends_the_server() -> None:
    s = RawServer()
    s.initialize()
    s.open(DOC, TEXT)
    s.proc.stdin.close()  # type: ignore[union-attr]
    t0 = time.monotonic()
    rc = s.finish(timeout=30)
    assert time.monotonic() - t0 < 30 and rc is not None
    assert "Traceback" not in s.stderr, s.stderr[-3000:]


def test_abrupt_disconnect_during_analysis() -> None:
    s = RawServer()
    s.initialize()
    heavy = "import math\n" + "".join(
        f"\ndef f{i}(x, y):\n    return math.sqrt(x * {i}.5 + y) - math.sqrt(x * {i}.5)\n" for i in range(300))
    s.open(DOC, heavy)
    s.call("textDocument/hover", {"textDocument": {"uri": DOC}, "position": {"line": 3, "character": 20}})
    s.proc.stdin.close()  # type: ignore[union-attr]
    s.proc.stdout.close()  # type: ignore[union-attr]
    rc = s.finish(timeout=60)
    assert rc is not None


def test_exit_without_shutdown() -> None:
    s = RawServer()
    s.initialize()
    s.notify("exit", None)
    assert s.finish(timeout=30) in (0, 1)  # LSP: 1 when exit comes without shutdown


def test_requests_after_shutdown_are_refused() -> None:
    s = RawServer()
    s.initialize()
    assert "result" in s.call("shutdown")
    # LSP 3.17 (shutdown): requests after it error with InvalidRequest (-32600).
    m = s.call("textDocument/hover", {"textDocument": {"uri": DOC}, "position": {"line": 0, "character": 0}})
    assert m["error"]["code"] == -32600, m
    # A diagnostic pull is declined as LSP 3.17 provides: ServerCancelled, and do not retrigger.
    m = s.call("textDocument/diagnostic", {"textDocument": {"uri": DOC}})
    assert m["error"]["code"] == -32802 and m["error"]["data"] == {"retriggerRequest": False}, m
    s.notify("exit", None)
    assert s.finish(timeout=30) == 0


def test_json_with_unicode_and_crlf_text(server: RawServer) -> None:
    text = "import math\r\n\r\n\r\ndef f(ωμέγα):\r\n    return math.sqrt(ωμέγα + 1) - math.sqrt(ωμέγα)  # 😀\r\n"
    server.open(DOC, text)
    d = server.diagnostics(DOC)
    [diag] = [x for x in d["params"]["diagnostics"] if x.get("code") == "CH101"]
    line = text.split("\r\n")[4]
    # UTF-16 columns (the encoding this client offered): the names are in the BMP, so one unit per character.
    assert diag["range"]["start"] == {"line": 4, "character": line.index("math.sqrt")}
    json.dumps(d)
