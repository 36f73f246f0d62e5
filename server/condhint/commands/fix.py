"""`condhint fix PATH…` or `condhint fix PATH:LINE[:COL]`: apply the best verified rewrite of each finding (or
of the one at a place), or show them as a diff.

Each file is read once, fixed in memory (up to `PASSES` rounds, so fixes that overlapped an earlier one get
their turn), and written back atomically in its own encoding and line endings, unless it changed on disk
meanwhile. A second run changes nothing: fixed code has no finding left that a fix covers.
"""
from __future__ import annotations

import argparse
import difflib
import os
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path

from condhint.atomic import write_bytes_atomic
from condhint.commands.common import UsageError, add_code_options, add_config_options, config_from, selected_codes
from condhint.commands.explain import parse_location
from condhint.config import Config
from condhint.engine import analyse_module
from condhint.findings import SEVERITY_RANK, Finding, Fix
from condhint.fixing import fixes_for
from condhint.kinds import KINDS
from condhint.rewrites import apply_fixes
from condhint.rewrites.apply import select_fixes
from condhint.runner import discover
from condhint.sourcefile import SourceFile, UnreadableFile, read_source

PASSES = 3
FIXABLE_CODES = sorted(k.code for k in KINDS if k.fixable)


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("fix", help="apply verified stable rewrites", description=(
        "Apply, for each finding, the best rewrite that was verified equivalent and measured more accurate "
        "over the same inputs. Files are written atomically and only if unchanged since they were read. "
        "Given PATH:LINE[:COL] (columns 1-based, as `check` prints them), only the finding that starts there "
        "(else the smallest one containing it; without COL, those on the line) is fixed. "
        "Exit status: 0 when done (or nothing to do), 1 when --diff shows changes, a file was not written or "
        "nothing at PATH:LINE[:COL] has a verified fix, 2 on usage errors."))
    p.add_argument("paths", nargs="*", default=["."], metavar="PATH",
                   help="files or directories (default: .), or one PATH:LINE[:COL]")
    add_code_options(p, f"fix only these codes ({', '.join(FIXABLE_CODES)})")
    p.add_argument("--diff", action="store_true", help="print a unified diff instead of writing the files")
    add_config_options(p)
    p.set_defaults(run=run)


@dataclass
class FileResult:
    shown: str
    source: SourceFile
    text: str
    applied: list[tuple[Finding, Fix]] = field(default_factory=list)
    unfixed: list[Finding] = field(default_factory=list)

    @property
    def changed(self) -> bool:
        return self.text != self.source.text


Place = tuple[int, int | None]  # (line, 0-based column or None)


def findings_at(findings: list[Finding], line: int, col: int | None) -> list[Finding]:
    """The finding that starts at (line, col), else the smallest containing it; without col, those covering
    the line."""
    if col is None:
        return [f for f in findings if f.span.line <= line <= f.span.end_line]
    starts = [f for f in findings if (f.span.line, f.span.col) == (line, col)]
    inside = starts or [f for f in findings if (f.span.line, f.span.col) <= (line, col) <= (f.span.end_line,
                                                                                       f.span.end_col)]
    if not inside:
        return []
    return [min(inside, key=lambda f: (f.span.end_line - f.span.line, f.span.end_col - f.span.col))]


def fix_text(text: str, shown: str, cfg: Config, codes: set[str], minimum: str,
             at: Place | None = None) -> tuple[str, list, list]:
    """The text with the best verified fix of every selected finding (or, with `at`, of the one at that place,
    in a single pass) applied; (text, applied, unfixed)."""
    applied: list[tuple[Finding, Fix]] = []
    unfixed: list[Finding] = []
    rank = SEVERITY_RANK[minimum]
    for _ in range(1 if at else PASSES):
        ma = analyse_module(text, shown, cfg)
        wanted = [f for f in ma.report.findings if f.code in codes and f.rank >= rank]
        if at:
            wanted = findings_at(wanted, *at)
        best: list[tuple[Finding, Fix]] = []
        unfixed = []
        for f in wanted:
            found = fixes_for(f, ma, cfg)
            if found:
                best.append((f, found[0]))
            else:
                unfixed.append(f)
        chosen = select_fixes(fix for _, fix in best)
        if not chosen:
            break
        try:
            new = apply_fixes(text, chosen)
        except ValueError:
            break
        if new == text:
            break
        applied += [(f, fix) for f, fix in best if any(fix is c for c in chosen)]
        text = new
    return text, applied, unfixed


def _place(paths: list[str]) -> tuple[str, Place] | None:
    """(path, place) when the one argument is PATH:LINE[:COL] (and not itself an existing path)."""
    located = [p for p in paths if not Path(p).exists() and ":" in p]
    if not located:
        return None
    if len(paths) > 1:
        raise UsageError(f"{located[0]}: a PATH:LINE[:COL] is fixed on its own, without other paths")
    path, cell, line, col = parse_location(located[0])
    if cell is not None or path.suffix != ".py":
        raise UsageError(f"{located[0]}: `fix` rewrites Python files (.py) only")
    if not path.is_file():
        raise UsageError(f"no such file: {path}")
    return str(path), (line, col)


def run(args: argparse.Namespace) -> int:
    located = _place(args.paths)
    where = args.paths[0]
    if located:
        args.paths = [located[0]]
    cfg = config_from(args, args.paths)
    missing = [p for p in args.paths if not Path(p).exists()]
    if missing:
        raise UsageError(f"no such file or directory: {', '.join(missing)}")
    codes = selected_codes(args, FIXABLE_CODES, "codes with verified fixes")
    minimum = args.min_severity or "info"
    cfg = replace(cfg, kappa_formula=False)
    status = 0
    results: list[FileResult] = []
    for target in discover(args.paths, cfg):
        if target.path.suffix != ".py":
            continue
        try:
            src = read_source(target.path)
        except UnreadableFile as exc:
            print(f"condhint: {exc}", file=sys.stderr)
            status = 1
            continue
        text, applied, unfixed = fix_text(src.text, target.shown, cfg.for_path(target.shown), codes, minimum,
                                          located[1] if located else None)
        res = FileResult(target.shown, src, text, applied, unfixed)
        results.append(res)
        if not res.changed:
            continue
        if args.diff:
            sys.stdout.write(unified_diff(res))
            status = 1
        elif not write_back(target.path, res):
            status = 1
    if located and not any(r.applied for r in results):
        print(f"condhint: {where}: {_nothing_fixed(results, located[1], cfg)}; the file is unchanged",
              file=sys.stderr)
        return 1
    _summary(results, args.diff)
    return status


def _nothing_fixed(results: list[FileResult], at: Place, cfg: Config) -> str:
    """Why nothing was fixed at a place: the findings there have no verified fix, or there are none."""
    unfixed = sorted({f.code for r in results for f in r.unfixed})
    if unfixed:
        return f"no verified fix was found for the {', '.join(unfixed)} finding there"
    there = [f for r in results
             for f in findings_at(analyse_module(r.text, r.shown, cfg.for_path(r.shown)).report.findings, *at)]
    if there:
        return (f"the {', '.join(sorted({f.code for f in there}))} finding there is not among the selected "
                f"fixable codes and severities ({', '.join(FIXABLE_CODES)} have verified fixes)")
    return "no finding there"


def unified_diff(res: FileResult) -> str:
    a = res.source.text.splitlines(keepends=True)
    b = res.text.splitlines(keepends=True)
    lines = list(difflib.unified_diff(a, b, fromfile=f"a/{res.shown}", tofile=f"b/{res.shown}"))
    return "".join(line if line.endswith(("\n", "\r")) else line + "\n\\ No newline at end of file\n"
                   for line in lines)


def write_back(path: Path, res: FileResult) -> bool:
    """Write atomically, in the file's encoding, unless the file changed on disk since it was read."""
    src = res.source
    try:
        st = os.stat(path)
        unchanged = (st.st_mtime_ns, st.st_size) == (src.mtime_ns, src.size) and path.read_bytes() == src.raw
    except OSError:
        unchanged = False
    if not unchanged:
        print(f"condhint: {res.shown}: changed on disk since it was read; not written", file=sys.stderr)
        return False
    try:
        data = res.text.encode(src.encoding)
    except UnicodeEncodeError as exc:
        print(f"condhint: {res.shown}: the fixed text cannot be written as {src.encoding}: {exc}", file=sys.stderr)
        return False
    write_bytes_atomic(path, data)
    return True


def _summary(results: list[FileResult], diff: bool) -> None:
    out = sys.stderr if diff else sys.stdout
    n = sum(len(r.applied) for r in results)
    files = sum(1 for r in results if r.changed)
    for r in results:
        for f, fix in r.applied:
            verb = "would fix" if diff else "fixed"
            before = f.digits_lost if f.digits_lost is not None else fix.measured_digits_lost_before  # as `check` says
            print(f"{r.shown}:{f.span.line}:{f.span.col + 1}: {verb} {f.code}: {fix.title} (digits lost "
                  f"{before:.1f} → {fix.measured_digits_lost_after:.1f}, measured)", file=out)
    left = sum(len(r.unfixed) for r in results)
    verb = "would be applied" if diff else "applied"
    summary = f"{n} fix{'es' if n != 1 else ''} {verb} in {files} file{'s' if files != 1 else ''}"
    if left:
        summary += f"; {left} finding{'s' if left != 1 else ''} without a verified fix"
    print(summary, file=out)
