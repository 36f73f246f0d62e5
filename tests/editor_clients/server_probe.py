"""Ask the real server to answer `initialize` over stdio before the editors are started, so an
editor test fails with the server's own error rather than a timeout inside the editor."""
from __future__ import annotations

import json
import selectors
import subprocess
import time

import pytest

PROBE_SECONDS = 60


def _frame(payload: dict) -> bytes:
    body = json.dumps(payload).encode()
    return b"Content-Length: %d\r\n\r\n" % len(body) + body


def _read_message(proc: subprocess.Popen[bytes], deadline: float) -> dict | None:
    """One JSON-RPC message from the server's stdout, or None on timeout or end of output."""
    assert proc.stdout is not None
    selector = selectors.DefaultSelector()
    selector.register(proc.stdout, selectors.EVENT_READ)
    buffer = b""

    def read_some() -> bool:
        nonlocal buffer
        remaining = deadline - time.monotonic()
        if remaining <= 0 or not selector.select(remaining):
            return False
        chunk = proc.stdout.read1(65536)  # type: ignore[union-attr]
        buffer += chunk
        return bool(chunk)

    while b"\r\n\r\n" not in buffer:
        if not read_some():
            return None
    header, _, buffer = buffer.partition(b"\r\n\r\n")
    length = next(int(line.split(b":")[1]) for line in header.split(b"\r\n")
                  if line.lower().startswith(b"content-length"))
    while len(buffer) < length:
        if not read_some():
            return None
    return json.loads(buffer[:length])


def initialize_answer(cmd: list[str]) -> tuple[dict | None, str]:
    """The server's answer to `initialize` (None if it gave none) and what it wrote to stderr."""
    proc = subprocess.Popen(cmd, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert proc.stdin is not None and proc.stderr is not None
    answer = None
    try:
        proc.stdin.write(_frame({"jsonrpc": "2.0", "id": 1, "method": "initialize",
                                 "params": {"processId": None, "rootUri": None, "capabilities": {}}}))
        proc.stdin.flush()
        deadline = time.monotonic() + PROBE_SECONDS
        while answer is None:
            message = _read_message(proc, deadline)
            if message is None:
                break
            if message.get("id") == 1:
                answer = message
        if answer is not None:
            proc.stdin.write(_frame({"jsonrpc": "2.0", "id": 2, "method": "shutdown"}))
            proc.stdin.write(_frame({"jsonrpc": "2.0", "method": "exit"}))
            proc.stdin.flush()
    except BrokenPipeError:
        pass
    finally:
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
    return answer, proc.stderr.read().decode(errors="replace")


def require_server(cmd: list[str]) -> None:
    """Skip while the project has no `serve` command yet; fail if it has one that does not
    answer `initialize` with capabilities."""
    answer, stderr = initialize_answer(cmd)
    if answer is None and "invalid choice: 'serve'" in stderr:
        pytest.skip("condhint has no `serve` command yet: the editor end-to-end tests need the server")
    assert answer is not None, f"{' '.join(cmd)} did not answer initialize; stderr:\n{stderr[-4000:]}"
    assert "capabilities" in answer.get("result", {}), answer
