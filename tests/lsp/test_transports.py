"""`condhint serve` started the way editors' clients start it: `--stdio` (appended by vscode-languageclient),
`--clientProcessId`, `--pipe=NAME` and `--socket=PORT` (the client listens, the server connects), each over a
real connection to the real server."""
from __future__ import annotations

import asyncio
import json
import socket
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest
from lsprotocol import types

from lsp_support import PUBLISH, SERVER, TIMEOUT, VSCODE, make_client
from pytest_lsp import client_capabilities

SOURCE = "import math\n\n\ndef f(x):\n    return math.sqrt(x + 1) - math.sqrt(x)\n"


async def _initialise_and_diagnose(client: Any, root: Path, process_id: int | None = None) -> list[types.Diagnostic]:
    uri = root.resolve().as_uri()
    await asyncio.wait_for(client.initialize_session(types.InitializeParams(
        capabilities=client_capabilities(VSCODE), root_uri=uri, process_id=process_id,
        workspace_folders=[types.WorkspaceFolder(uri=uri, name=root.name)])), TIMEOUT)
    doc = (root / "f.py").resolve().as_uri()
    published = client.recorder.expect(PUBLISH, lambda p: p.uri == doc and p.diagnostics)
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        types.TextDocumentItem(uri=doc, language_id="python", version=1, text=SOURCE)))
    return (await asyncio.wait_for(published, TIMEOUT)).diagnostics


@pytest.mark.asyncio
async def test_stdio_flag_appended_by_vscode_languageclient_is_accepted(tmp_path: Path) -> None:
    client = make_client()
    await client.start_io(*SERVER, "--stdio", cwd=str(tmp_path))
    try:
        diagnostics = await _initialise_and_diagnose(client, tmp_path)
        assert [d.code for d in diagnostics] == ["CH101"]
        await asyncio.wait_for(client.shutdown_session(), TIMEOUT)
    finally:
        await client.stop()


def _sleeper() -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", "import time; time.sleep(120)"])


async def _exit_status(client: Any, timeout: float) -> int:
    process = client._server  # the server's asyncio subprocess (pygls' JsonRPCClient)  # noqa: SLF001
    return await asyncio.wait_for(process.wait(), timeout)


@pytest.mark.asyncio
@pytest.mark.parametrize("how", ["--clientProcessId", "initialize"])
async def test_server_exits_when_the_client_process_ends(tmp_path: Path, how: str) -> None:
    editor = _sleeper()
    client = make_client()
    flags = [f"--clientProcessId={editor.pid}"] if how == "--clientProcessId" else []
    await client.start_io(*SERVER, "--stdio", *flags, cwd=str(tmp_path))
    try:
        diagnostics = await _initialise_and_diagnose(client, tmp_path,
                                                     editor.pid if how == "initialize" else None)
        assert diagnostics, "the server works while the editor lives"
        assert client._server.returncode is None  # noqa: SLF001
        editor.kill()
        editor.wait(TIMEOUT)
        assert await _exit_status(client, 10.0) == 1
    finally:
        editor.kill()
        await client.stop()


@pytest.mark.asyncio
async def test_a_client_process_id_that_does_not_exist_here_is_not_watched(tmp_path: Path) -> None:
    """A pid from another process namespace (an editor in a container) must not stop the server."""
    gone = _sleeper()
    gone.kill()
    gone.wait(TIMEOUT)
    client = make_client()
    await client.start_io(*SERVER, "--stdio", cwd=str(tmp_path))
    try:
        assert await _initialise_and_diagnose(client, tmp_path, gone.pid)
        await asyncio.wait_for(client.shutdown_session(), TIMEOUT)
    finally:
        await client.stop()


# ---- pipe and socket: the client listens, the server connects ---------------------------------------------
class Framed:
    """JSON-RPC with Content-Length framing over a connected socket; every read has a timeout."""

    def __init__(self, conn: socket.socket) -> None:
        self.conn, self.buffer, self.next_id = conn, b"", 0
        conn.settimeout(TIMEOUT)

    def send(self, method: str, params: Any, request: bool = True) -> int | None:
        message: dict[str, Any] = {"jsonrpc": "2.0", "method": method, "params": params}
        if request:
            self.next_id += 1
            message["id"] = self.next_id
        body = json.dumps(message).encode()
        self.conn.sendall(b"Content-Length: %d\r\n\r\n" % len(body) + body)
        return message.get("id")

    def receive(self) -> dict[str, Any]:
        while b"\r\n\r\n" not in self.buffer:
            self._fill()
        head, _, self.buffer = self.buffer.partition(b"\r\n\r\n")
        length = next(int(v) for k, _, v in (h.partition(b":") for h in head.split(b"\r\n"))
                      if k.strip().lower() == b"content-length")
        while len(self.buffer) < length:
            self._fill()
        body, self.buffer = self.buffer[:length], self.buffer[length:]
        return json.loads(body)

    def _fill(self) -> None:
        chunk = self.conn.recv(65536)
        if not chunk:
            raise EOFError("the server closed the connection")
        self.buffer += chunk

    def wait_for(self, pred) -> dict[str, Any]:  # noqa: ANN001
        end = time.monotonic() + TIMEOUT
        while time.monotonic() < end:
            message = self.receive()
            if message.get("method") == "workspace/configuration":
                self._answer(message["id"], [None])  # the server waits for an answer
            elif pred(message):
                return message
        raise TimeoutError("no matching message")

    def _answer(self, msg_id: Any, result: Any) -> None:
        body = json.dumps({"jsonrpc": "2.0", "id": msg_id, "result": result}).encode()
        self.conn.sendall(b"Content-Length: %d\r\n\r\n" % len(body) + body)


def _session_over(listener: socket.socket, flag: str, root: Path) -> None:
    listener.listen(1)
    listener.settimeout(TIMEOUT)
    server = subprocess.Popen([*SERVER, flag], cwd=root, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL)
    try:
        conn, _ = listener.accept()
        with conn:
            rpc = Framed(conn)
            uri = root.resolve().as_uri()
            init = rpc.send("initialize", {"processId": None, "rootUri": uri, "capabilities": {}})
            reply = rpc.wait_for(lambda m: m.get("id") == init)
            assert reply["result"]["serverInfo"]["name"] == "condhint"
            rpc.send("initialized", {}, request=False)
            doc = (root / "f.py").resolve().as_uri()
            rpc.send("textDocument/didOpen", {"textDocument": {"uri": doc, "languageId": "python", "version": 1,
                                                               "text": SOURCE}}, request=False)
            published = rpc.wait_for(lambda m: m.get("method") == PUBLISH and m["params"]["diagnostics"])
            assert [d["code"] for d in published["params"]["diagnostics"]] == ["CH101"]
            down = rpc.send("shutdown", None)
            rpc.wait_for(lambda m: m.get("id") == down)
            rpc.send("exit", None, request=False)
        assert server.wait(TIMEOUT) == 0
    finally:
        server.kill()
        server.wait(TIMEOUT)


def test_socket_flag_connects_to_the_client_on_loopback(tmp_path: Path) -> None:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as listener:
        listener.bind(("127.0.0.1", 0))
        _session_over(listener, f"--socket={listener.getsockname()[1]}", tmp_path)


def test_pipe_flag_connects_to_the_clients_unix_socket(tmp_path: Path) -> None:
    path = tmp_path / "lsp.sock"
    with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as listener:
        listener.bind(str(path))
        _session_over(listener, f"--pipe={path}", tmp_path)


def test_socket_flag_without_a_listening_client_is_a_clear_usage_error(tmp_path: Path) -> None:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]  # bound, never listening: connections are refused
        done = subprocess.run([*SERVER, f"--socket={port}"], cwd=tmp_path, capture_output=True, text=True,
                              timeout=TIMEOUT)
    assert done.returncode == 2
    assert f"--socket {port}: cannot reach the client" in done.stderr
