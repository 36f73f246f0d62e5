"""Options and helpers shared by subcommands."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

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
