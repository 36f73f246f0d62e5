"""`condhint explain PATH:LINE[:COL]`: the full analysis of one expression, for a reader."""
from __future__ import annotations

import argparse
import ast
import json
import re
import sys
from pathlib import Path
from typing import Any

from condhint.commands.common import UsageError, add_config_options, config_from
from condhint.sourcefile import UnreadableFile, read_source

_LOCATION = re.compile(r"^(?P<path>.+?):(?P<line>\d+)(?::(?P<col>\d+))?$")
_CELL_LOCATION = re.compile(r"^(?P<path>.+?\.ipynb):(?P<cell>\d+):(?P<line>\d+)(?::(?P<col>\d+))?$")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("explain", help="explain one expression: κ, digits lost across its range, fixes",
                       description="Explain the floating-point expression at PATH:LINE[:COL] (columns 1-based, "
                                   "as `check` prints them): its condition number κ and formula, digits lost "
                                   "(predicted and measured against mpmath) across the range of an input, the "
                                   "operations whose rounding matters, and candidate fixes measured the same way.")
    p.add_argument("location", metavar="PATH:LINE[:COL]", help="in a notebook: PATH.ipynb:CELL:LINE[:COL]")
    p.add_argument("--plot", metavar="FILE.png", help="draw digits lost against the input (needs matplotlib)")
    p.add_argument("--try", dest="tries", action="append", default=[], metavar="EXPR",
                   help="also measure your own formula for the whole expression (parsed, never run)")
    p.add_argument("--format", choices=("text", "json"), default="text")
    p.add_argument("--points", type=int, default=121, metavar="N", help="points across the range (default 121)")
    add_config_options(p)
    p.set_defaults(run=run)


def parse_location(text: str) -> tuple[Path, int | None, int, int | None]:
    """(path, notebook cell or None, line, 0-based column or None)."""
    m = _CELL_LOCATION.match(text) or _LOCATION.match(text)
    if not m:
        raise UsageError(f"expected PATH:LINE[:COL] (PATH.ipynb:CELL:LINE[:COL] in a notebook), got {text!r}")
    cell = int(m.group("cell")) if "cell" in m.groupdict() else None
    line = int(m.group("line"))
    col = int(m.group("col")) - 1 if m.group("col") else None
    if line < 1 or (col is not None and col < 0) or cell == 0:
        raise UsageError(f"{text}: cells, lines and columns start at 1")
    return Path(m.group("path")), cell, line, col


def _notebook_text(path: Path, cell: int | None, line: int) -> tuple[str, int, Any]:
    """The notebook's joined code cells, the joined line of (cell, line), and the map back to cells."""
    from condhint.review.notebooks import join_cells, joined_line, read_cells

    if cell is None:
        raise UsageError(f"{path}: give the cell too, as {path}:CELL:LINE[:COL]")
    try:
        text, where, _ = join_cells(read_cells(path), str(path))
    except (OSError, ValueError) as exc:
        raise UsageError(f"{path}: {exc}") from None
    at = joined_line(where, cell, line)
    if at is None:
        raise UsageError(f"{path}: cell {cell} has no analysable line {line} (is it a code cell that parses?)")

    def back(ln: int) -> tuple[int | None, int]:
        for first, count, number in where:
            if first <= ln < first + count:
                return number, ln - first + 1
        return None, ln

    return text, at, back


def run(args: argparse.Namespace) -> int:
    from condhint.review.explain import NothingThere, as_dict, explain, render

    path, cell, line, col = parse_location(args.location)
    if not path.is_file():
        raise UsageError(f"no such file: {path}")
    for t in args.tries:
        try:
            ast.parse(t, mode="eval")
        except SyntaxError as exc:
            raise UsageError(f"--try {t!r}: not a Python expression ({exc.msg})") from None
    if not 8 <= args.points <= 5000:
        raise UsageError("--points must be from 8 to 5000")
    cfg = config_from(args, [str(path)]).for_path(str(path))
    back = None
    if path.suffix == ".ipynb":
        text, line, back = _notebook_text(path, cell, line)
    else:
        try:
            text = read_source(path).text
        except UnreadableFile as exc:
            raise UsageError(str(exc)) from None
    try:
        expl, note = explain(text, str(path), line, col, cfg, tuple(args.tries), curve_points=args.points)
    except NothingThere as exc:
        raise UsageError(f"{args.location}: {exc}") from None
    if back is not None:
        expl.cell_line = back
    if args.format == "json":
        sys.stdout.write(json.dumps(as_dict(expl, note), indent=2, ensure_ascii=False) + "\n")
    else:
        sys.stdout.write(render(expl, note))
    if args.plot:
        from condhint.review.plot import PlotUnavailable, plot

        try:
            plot(expl, args.plot, (cfg.thresholds.info, cfg.thresholds.warning, cfg.thresholds.error))
        except (PlotUnavailable, ValueError) as exc:
            raise UsageError(str(exc)) from None
        print(f"condhint: wrote {args.plot}", file=sys.stderr)
    return 0
