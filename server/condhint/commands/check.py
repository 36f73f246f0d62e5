"""`condhint check PATH…`: findings for files, trees and notebooks, as text, JSON, SARIF or Markdown."""
from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

from condhint.commands.common import UsageError, add_code_options, add_config_options, config_from, selected_codes
from condhint.findings import SEVERITY_RANK
from condhint.outputs import WRITERS, writer
from condhint.review.options import Narrowing, add_review_options, print_notes, run_settings, statistics_text
from condhint.review.written import keep_codes
from condhint.runner import check_paths

HUMAN_FORMATS = ("text", "markdown")  # these show warnings and errors unless --min-severity says otherwise
FIX_FORMATS = ("json", "sarif", "markdown")  # these carry verified fixes
FORMULA_FORMATS = ("json", "sarif")  # these carry the symbolic κ formula


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("check", help="report numeric accuracy findings", description=(
        "Report, for each floating-point expression, digits lost to rounding (avoidable), sensitivity to "
        "inputs (inherent), overflow and domain risks. Figures are estimates over sampled inputs."))
    p.add_argument("paths", nargs="*", default=["."], help="files (.py, .ipynb) or directories (default: .)")
    p.add_argument("--format", choices=sorted(WRITERS), default="text")
    p.add_argument("--output", metavar="FILE", help="write the report to FILE instead of stdout")
    p.add_argument("--fail-on", choices=("info", "warning", "error"), help="exit 1 from this severity on")
    p.add_argument("--mark-fixes", action="store_true",
                   help="text output: tag findings that have a verified fix and count them (searching the fixes "
                        "makes the check slower; json, sarif and markdown always carry them)")
    p.add_argument("--statistics", action="store_true",
                   help="add a table of findings by code: severities, suppressed, files, worst loss")
    add_code_options(p, "report only findings of these codes")
    add_config_options(p)
    add_review_options(p)
    p.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    cfg = config_from(args, args.paths)
    missing = [p for p in args.paths if not Path(p).exists()]
    if missing:
        raise UsageError(f"no such file or directory: {', '.join(missing)}")
    if args.min_severity:
        cfg = replace(cfg, min_severity=args.min_severity) if args.format not in HUMAN_FORMATS else cfg
    if args.format not in FORMULA_FORMATS:  # derived with sympy: on real code the costliest step, shown only there
        cfg = replace(cfg, kappa_formula=False)
    codes = selected_codes(args)
    narrowing = Narrowing(args)
    mark = args.mark_fixes and args.format == "text" and cfg.fixes
    shown = args.min_severity or ("warning" if args.format in HUMAN_FORMATS else "info")
    result = check_paths(args.paths, cfg, fixes=(args.format in FIX_FORMATS or mark) and cfg.fixes,
                         written=narrowing.written(codes, shown), **run_settings(args))
    keep_codes(result.reports, codes)  # before everything else: what is not selected is not reported at all
    notes = narrowing.apply(result.reports)
    options = {"min_severity": shown, "statistics": args.statistics and args.format != "text", "mark_fixes": mark}
    out = writer(args.format)(result.reports, options) + statistics_text(args, result.reports, shown)
    if args.output:
        from condhint.atomic import write_text_atomic

        write_text_atomic(Path(args.output), out)
    else:
        sys.stdout.write(out)
    print_notes(notes)
    if args.write_baseline:
        return 0
    fail = SEVERITY_RANK[args.fail_on or cfg.fail_on]
    return 1 if any(f.rank >= fail for f in result.findings) else 0
