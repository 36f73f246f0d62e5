"""Options and helpers shared by subcommands."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any, Iterable, Sequence

from condhint.config import SEVERITIES, Config, load_config


class UsageError(Exception):
    """Bad command-line input: exit status 2 with the message."""


def add_config_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--config", metavar="FILE", help="pyproject.toml to read [tool.condhint] from "
                   "(default: the nearest one above the first path)")
    p.add_argument("--min-severity", choices=SEVERITIES, help="report findings from this severity on")
    p.add_argument("--samples", type=int, metavar="N", help="binary64 samples per expression")
    p.add_argument("--default-range", nargs=2, type=float, metavar=("LOW", "HIGH"),
                   help="range for inputs without a declared one")


def config_from(args: argparse.Namespace, paths: list[str]) -> Config:
    overrides: dict[str, Any] = {}
    if getattr(args, "samples", None) is not None:
        overrides["samples"] = args.samples
    if getattr(args, "default_range", None):
        overrides["default_range"] = list(args.default_range)
    explicit = Path(args.config) if getattr(args, "config", None) else None
    if explicit is not None and not explicit.is_file():
        raise UsageError(f"--config {explicit}: no such file")
    start = Path(paths[0]) if paths else Path.cwd()
    cfg, messages, _ = load_config(start if start.exists() else Path.cwd(), explicit, overrides)
    for m in messages:
        print(f"condhint: {m}", file=sys.stderr)
    return cfg


def add_code_options(p: argparse.ArgumentParser, select_help: str) -> None:
    """--select and --ignore: which finding codes a command acts on (`selected_codes` reads them)."""
    p.add_argument("--select", action="append", metavar="CODE[,CODE…]", help=select_help + "; may be repeated")
    p.add_argument("--ignore", action="append", metavar="CODE[,CODE…]",
                   help="leave out findings of these codes; may be repeated")


def _split(values: Iterable[str]) -> set[str]:
    return {c.strip().upper() for item in values for c in item.split(",") if c.strip()}


def selected_codes(args: argparse.Namespace, among: Sequence[str] | None = None, what: str = "") -> set[str]:
    """The codes that --select (default: all of `among`) leaves after --ignore. Codes come from the registry
    of finding kinds; `among` (default: every code), described by `what`, narrows what --select may name."""
    from condhint.kinds import KINDS

    known = [k.code for k in KINDS]
    allowed = list(among) if among is not None else known
    select, ignore = _split(getattr(args, "select", None) or []), _split(getattr(args, "ignore", None) or [])
    for option, codes in (("--select", select), ("--ignore", ignore)):
        unknown = sorted(codes - set(known))
        if unknown:
            raise UsageError(f"{option}: unknown code{'s' if len(unknown) > 1 else ''} {', '.join(unknown)} "
                             f"(known codes: {', '.join(known)})")
    beyond = sorted(select - set(allowed))
    if beyond:
        raise UsageError(f"--select: {', '.join(beyond)}: not among the {what or 'codes this command acts on'} "
                         f"({', '.join(allowed)})")
    return (select or set(allowed)) - ignore
