"""The command line: `condhint check|fix|serve|explain|merge`. A thin adapter over the core."""
from __future__ import annotations

import argparse
import importlib
import sys

from condhint import __version__
from condhint.commands import COMMANDS
from condhint.commands.common import UsageError


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="condhint",
        description="Conditioning and floating-point accuracy hints for Python code. Figures are estimates over "
                    "sampled inputs, not proofs.")
    parser.add_argument("--version", action="version", version=f"condhint {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"condhint.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"condhint.commands.{name}":
                raise
            continue
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: 0 for --help/--version, 2 for usage errors
        return int(exc.code or 0)
    if not getattr(args, "run", None):
        parser.print_help(sys.stderr)
        return 2
    try:
        return int(args.run(args))
    except UsageError as exc:
        print(f"condhint: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return 0
