"""A raw JSON-RPC client for the real server over stdio: hand-written Content-Length framing, so tests can
also send what no well-behaved client would (broken JSON, bad headers, requests out of order).

A reader thread parses the server's messages into a queue; every wait has a timeout.
"""
from __future__ import annotations

import json
import os
import queue
import subprocess
import sys
import threading
import time
from pathlib import Path
from typing import Any, Callable

SERVER = [sys.executable, "-m", "condhint", "serve", "--log-level", "warning"]
TIMEOUT = 30.0


class RawServer:
    def __init__(self, cwd: Path | None = None) -> None:
        self.proc = subprocess.Popen(SERVER, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                     cwd=cwd)
        self.messages: "queue.Queue[dict[str, Any] | None]" = queue.Queue()
        self.backlog: list[dict[str, Any]] = []
        self._next_id = 1000
        self._stderr: list[bytes] = []
        threading.Thread(target=self._read, daemon=True).start()
        threading.Thread(target=self._drain_stderr, daemon=True).start()

    # ---- framing ------------------------------------------------------------------------------------------
    def _read(self) -> None:
        out = self.proc.stdout
        assert out is not None
        try:
            while True:
                length = None
                while True:
                    line = out.readline()
                    if not line:
                        return
                    line = line.strip()
                    if not line:
                        break
                    name, _, value = line.decode("ascii", "replace").partition(":")
                    if name.lower() == "content-length":
                        length = int(value.strip())
                if length is None:
                    continue
                body = out.read(length)
                self.messages.put(json.loads(body))
        finally:
            self.messages.put(None)

    def _drain_stderr(self) -> None:
        assert self.proc.stderr is not None
        for chunk in iter(lambda: self.proc.stderr.read(4096), b""):  # type: ignore[union-attr]
            self._stderr.append(chunk)

    @property
    def stderr(self) -> str:
        return b"".join(self._stderr).decode("utf-8", "replace")

    def send_raw(self, data: bytes) -> None:
        assert self.proc.stdin is not None
        self.proc.stdin.write(data)
        self.proc.stdin.flush()

    def send(self, message: dict[str, Any]) -> None:
        body = json.dumps(message).encode("utf-8")
        self.send_raw(b"Content-Length: %d\r\n\r\n" % len(body) + body)

    # ---- requests and notifications ---------------------------------------------------------------------
    def request(self, method: str, params: Any = None) -> int:
        self._next_id += 1
        self.send({"jsonrpc": "2.0", "id": self._next_id, "method": method, "params": params})
        return self._next_id

    def notify(self, method: str, params: Any = None) -> None:
        self.send({"jsonrpc": "2.0", "method": method, "params": params})

    def wait(self, pred: Callable[[dict[str, Any]], bool], timeout: float = TIMEOUT) -> dict[str, Any]:
        """The first message (kept or new) satisfying `pred`; answers the server's own requests meanwhile."""
        for i, m in enumerate(self.backlog):
            if pred(m):
                return self.backlog.pop(i)
        end = time.monotonic() + timeout
        while True:
            left = end - time.monotonic()
            if left <= 0:
                raise TimeoutError(f"no matching message within {timeout} s; stderr:\n{self.stderr[-3000:]}")
            try:
                m = self.messages.get(timeout=left)
            except queue.Empty:
                continue
            if m is None:
                raise EOFError(f"the server closed its output; stderr:\n{self.stderr[-3000:]}")
            if "method" in m and "id" in m:  # a request from the server (configuration, progress): answer it
                result: Any = [None] * len(m.get("params", {}).get("items", [])) \
                    if m["method"] == "workspace/configuration" else None
                self.send({"jsonrpc": "2.0", "id": m["id"], "result": result})
                continue
            if pred(m):
                return m
            self.backlog.append(m)
            del self.backlog[:-500]  # keep only recent unmatched messages

    def call(self, method: str, params: Any = None, timeout: float = TIMEOUT) -> dict[str, Any]:
        rid = self.request(method, params)
        return self.wait(lambda m: m.get("id") == rid and "method" not in m, timeout)

    def initialize(self, root: Path | None = None) -> dict[str, Any]:
        caps = {"textDocument": {"publishDiagnostics": {}, "hover": {"contentFormat": ["plaintext"]}},
                "general": {"positionEncodings": ["utf-16"]}}
        res = self.call("initialize", {"processId": os.getpid(), "rootUri": root.as_uri() if root else None,
                                       "capabilities": caps})
        self.notify("initialized", {})
        return res

    def diagnostics(self, uri: str, version: int | None = None, timeout: float = TIMEOUT) -> dict[str, Any]:
        return self.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics"
                         and m["params"]["uri"] == uri
                         and (version is None or m["params"].get("version") in (version, None)), timeout)

    def open(self, uri: str, text: str, version: int = 1) -> None:
        self.notify("textDocument/didOpen", {"textDocument": {"uri": uri, "languageId": "python",
                                                              "version": version, "text": text}})

    def alive(self) -> bool:
        """The server still answers a request (hover on a document nobody opened may be null or an error)."""
        m = self.call("textDocument/hover", {"textDocument": {"uri": "file:///nowhere/ping.py"},
                                             "position": {"line": 0, "character": 0}})
        return "result" in m or "error" in m

    def close(self, timeout: float = TIMEOUT) -> int:
        """shutdown + exit; the exit status."""
        try:
            self.call("shutdown", None, timeout)
            self.notify("exit", None)
        except (BrokenPipeError, EOFError, TimeoutError):
            pass
        return self.finish(timeout)

    def finish(self, timeout: float = TIMEOUT) -> int:
        try:
            return self.proc.wait(timeout)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(10)
            raise
        finally:
            for s in (self.proc.stdin, self.proc.stdout):
                try:
                    if s:
                        s.close()
                except OSError:
                    pass

    def rss_kib(self) -> int:
        for line in Path(f"/proc/{self.proc.pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
        return 0
