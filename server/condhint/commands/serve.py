"""`condhint serve`: the language server, over stdio (the default) or TCP for debugging."""
from __future__ import annotations

import argparse
import logging
import sys

from condhint.commands.common import UsageError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("serve", help="run the language server", description=(
        "Run the condhint language server (LSP) over stdin/stdout, or over TCP with --tcp for debugging. "
        "Editors start it as `condhint serve`."))
    p.add_argument("--tcp", nargs="+", metavar="ADDRESS",
                   help="listen on [HOST] PORT instead of stdio (HOST defaults to 127.0.0.1: only this machine)")
    p.add_argument("--log-file", metavar="FILE", help="write the server's log to FILE")
    p.add_argument("--log-level", choices=("debug", "info", "warning", "error"), default="warning")
    p.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    handler: logging.Handler = logging.FileHandler(args.log_file) if args.log_file else logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    level = getattr(logging, args.log_level.upper())
    root = logging.getLogger()
    root.addHandler(handler)
    root.setLevel(level if level == logging.DEBUG else max(level, logging.WARNING))  # pygls is chatty
    logging.getLogger("condhint").setLevel(level)
    from condhint.lsp import create_server

    server = create_server()
    from condhint.lsp.server import ClientLog

    logging.getLogger("condhint").addHandler(ClientLog(server))
    if args.tcp:
        if len(args.tcp) > 2:
            raise UsageError("--tcp takes [HOST] PORT")
        host, port = args.tcp if len(args.tcp) == 2 else ("127.0.0.1", args.tcp[0])
        try:
            number = int(port)
        except ValueError:
            raise UsageError(f"--tcp: the port must be a number, not {port!r}")
        if not 0 < number < 65536:
            raise UsageError(f"--tcp: the port must be from 1 to 65535, not {number}")
        server.start_tcp(host or "127.0.0.1", number)
    else:
        server.start_io()
    return 0
