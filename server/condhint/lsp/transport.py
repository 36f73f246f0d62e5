"""How the server reaches its client: the transports editors ask for, and the watch on the client's process.

vscode-languageclient (and other clients modelled on it) start a server with one of `--stdio`,
`--pipe=NAME` or `--socket=PORT`, and may add `--clientProcessId=PID`. With a pipe or a socket the *client*
listens and the server connects to it; TCP connections go to the loopback address only.
"""
from __future__ import annotations

import asyncio
import logging
import os
import threading
import time
from typing import TYPE_CHECKING

from pygls.io_ import run_async

if TYPE_CHECKING:
    from pygls.lsp.server import LanguageServer

log = logging.getLogger(__name__)

WATCH_EVERY = 1.0  # seconds between checks that the client's process is alive
LOOPBACK = "127.0.0.1"


def connect_pipe(server: "LanguageServer", path: str) -> None:
    """Talk LSP over the Unix socket the client listens on at `path`."""
    _serve_connection(server, lambda: asyncio.open_unix_connection(path), f"pipe {path}")


def connect_socket(server: "LanguageServer", port: int) -> None:
    """Talk LSP over a TCP connection to the client listening on the loopback address at `port`."""
    _serve_connection(server, lambda: asyncio.open_connection(LOOPBACK, port), f"{LOOPBACK}:{port}")


def _serve_connection(server: "LanguageServer", connect, where: str) -> None:  # noqa: ANN001 - opener coroutine
    stop = threading.Event()
    server._stop_event = stop  # pygls' exit handler sets it to end the loop  # noqa: SLF001

    async def session() -> None:
        reader, writer = await connect()
        log.info("connected to the client over %s", where)
        server.protocol.set_writer(writer)  # type: ignore[arg-type]
        try:
            await run_async(stop_event=stop, reader=reader, protocol=server.protocol, logger=log,
                            error_handler=server.report_server_error)
        finally:
            writer.close()

    try:
        asyncio.run(session())
    finally:
        server.shutdown()


def alive(pid: int) -> bool:
    """Whether a process with this id exists (signal 0 checks without sending anything)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # it exists, owned by someone else
    return True


def watch_client(pid: int | None) -> bool:
    """End the server when the client's process `pid` ends (LSP: a server exits when its parent dies).

    A pid that does not exist when the watch starts is not watched: the client may live in another process
    namespace (a container), where its pid means nothing here. Returns whether a watch was started.
    """
    if pid is None or pid <= 0 or not alive(pid):
        if pid:
            log.info("client process %s is not visible from here: not watching it", pid)
        return False
    if pid in _watched:
        return True
    _watched.add(pid)

    def watch() -> None:
        while alive(pid):
            time.sleep(WATCH_EVERY)
        log.warning("the client's process %s ended: the server exits", pid)
        logging.shutdown()
        os._exit(1)  # the client is gone; there is no one to answer

    threading.Thread(target=watch, name=f"condhint-watch-{pid}", daemon=True).start()
    return True


_watched: set[int] = set()
