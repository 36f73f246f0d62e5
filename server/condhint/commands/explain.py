"""`condhint explain PATH:LINE[:COL]`: the full analysis of one expression, for a reader."""
from __future__ import annotations

import argparse
import ast
import json
import re
import sys
from pathlib import Path

from condhint.commands.common import UsageError, add_config_options, config_from
from condhint.sourcefile import UnreadableFile, read_source

_LOCATION = re.compile(r"^(?P<path>.+?):(?P<line>\d+)(?::(?P<col>\d+))?$")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("explain", help="explain one expression: κ, digits lost across its range, fixes",
                       description="Explain the floating-point expression at PATH:LINE[:COL] (columns 1-based, "
                                   "as `check` prints them): its condition number κ and formula, digits lost "
                                   "(predicted and measured against mpmath) across the range of an input, the "
                                   "operations whose rounding matters, and candidate fixes measured the same way.")
    p.add_argument("location", metavar="PATH:LINE[:COL]")
    p.add_argument("--plot", metavar="FILE.png", help="draw digits lost against the input (needs matplotlib)")
    p.add_argument("--try", dest="tries", action="append", default=[], metavar="EXPR",
                   help="also measure your own formula for the whole expression (parsed, never run)")
    p.add_argument("--format", choices=("text", "json"), default="text")
    p.add_argument("--points", type=int, default=121, metavar="N", help="points across the range (default 121)")
    add_config_options(p)
    p.set_defaults(run=run)


def parse_location(text: str) -> tuple[Path, int, int | None]:
    m = _LOCATION.match(text)
    if not m:
        raise UsageError(f"expected PATH:LINE or PATH:LINE:COL, got {text!r}")
    line = int(m.group("line"))
    col = int(m.group("col")) - 1 if m.group("col") else None
    if line < 1 or (col is not None and col < 0):
        raise UsageError(f"{text}: lines and columns start at 1")
    return Path(m.group("path")), line, col


def run(args: argparse.Namespace) -> int:
    from condhint.review.explain import NothingThere, as_dict, explain, render

    path, line, col = parse_location(args.location)
    if path.suffix == ".ipynb":
        raise UsageError("explain works on .py files; copy the notebook cell into a file to explain it")
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
    try:
        text = read_source(path).text
    except UnreadableFile as exc:
        raise UsageError(str(exc)) from None
    try:
        expl, note = explain(text, str(path), line, col, cfg, tuple(args.tries), curve_points=args.points)
    except NothingThere as exc:
        raise UsageError(f"{args.location}: {exc}") from None
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
