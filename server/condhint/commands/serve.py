"""`condhint serve`: the language server, over stdio (the default), the transports editors' clients ask for
(`--stdio`, `--pipe=NAME`, `--socket=PORT`, `--clientProcessId=PID`), or TCP for debugging."""
from __future__ import annotations

import argparse
import logging
import sys

from condhint.commands.common import UsageError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("serve", help="run the language server", description=(
        "Run the condhint language server (LSP) over stdin/stdout, or over TCP with --tcp for debugging. "
        "Editors start it as `condhint serve`."))
    transport = p.add_mutually_exclusive_group()
    transport.add_argument("--stdio", action="store_true", help="talk over stdin/stdout (the default)")
    transport.add_argument("--tcp", nargs="+", metavar="ADDRESS",
                           help="listen on [HOST] PORT instead of stdio (HOST defaults to 127.0.0.1: only this machine)")
    transport.add_argument("--pipe", metavar="NAME",
                           help="connect to the client listening on the Unix socket NAME (vscode-languageclient's pipe)")
    transport.add_argument("--socket", type=_port, metavar="PORT",
                           help="connect to the client listening on 127.0.0.1:PORT (vscode-languageclient's socket)")
    p.add_argument("--clientProcessId", dest="client_process_id", type=_pid, metavar="PID",
                   help="exit when the editor's process PID ends")
    p.add_argument("--log-file", metavar="FILE", help="write the server's log to FILE")
    p.add_argument("--log-level", choices=("debug", "info", "warning", "error"), default="warning")
    p.set_defaults(run=run)


def _port(text: str) -> int:
    try:
        number = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"the port must be a number, not {text!r}")
    if not 0 < number < 65536:
        raise argparse.ArgumentTypeError(f"the port must be from 1 to 65535, not {number}")
    return number


def _pid(text: str) -> int:
    try:
        number = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"a process id is a number, not {text!r}")
    if number <= 0:
        raise argparse.ArgumentTypeError(f"a process id is positive, not {number}")
    return number


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
    from condhint.lsp import transport

    if args.client_process_id is not None:
        transport.watch_client(args.client_process_id)
    if args.tcp:
        if len(args.tcp) > 2:
            raise UsageError("--tcp takes [HOST] PORT")
        host, port = args.tcp if len(args.tcp) == 2 else ("127.0.0.1", args.tcp[0])
        try:
            number = _port(port)
        except argparse.ArgumentTypeError as exc:
            raise UsageError(f"--tcp: {exc}")
        server.start_tcp(host or "127.0.0.1", number)
    elif args.pipe or args.socket:
        try:
            if args.pipe:
                transport.connect_pipe(server, args.pipe)
            else:
                transport.connect_socket(server, args.socket)
        except OSError as exc:
            where = f"--pipe {args.pipe}" if args.pipe else f"--socket {args.socket}"
            raise UsageError(f"{where}: cannot reach the client: {exc.strerror or exc}")
    else:
        server.start_io()
    return 0
