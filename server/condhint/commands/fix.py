"""`condhint fix PATH…`: apply the best verified rewrite of each finding, or show them as a diff.

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
        "Exit status: 0 when done (or nothing to do), 1 when --diff shows changes or a file was not written, "
        "2 on usage errors."))
    p.add_argument("paths", nargs="*", default=["."], help="files or directories (default: .)")
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


def fix_text(text: str, shown: str, cfg: Config, codes: set[str], minimum: str) -> tuple[str, list, list]:
    """The text with the best verified fix of every selected finding applied; (text, applied, unfixed)."""
    applied: list[tuple[Finding, Fix]] = []
    unfixed: list[Finding] = []
    rank = SEVERITY_RANK[minimum]
    for _ in range(PASSES):
        ma = analyse_module(text, shown, cfg)
        wanted = [f for f in ma.report.findings if f.code in codes and f.rank >= rank]
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


def run(args: argparse.Namespace) -> int:
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
        text, applied, unfixed = fix_text(src.text, target.shown, cfg.for_path(target.shown), codes, minimum)
        res = FileResult(target.shown, src, text, applied, unfixed)
        results.append(res)
        if not res.changed:
            continue
        if args.diff:
            sys.stdout.write(unified_diff(res))
            status = 1
        elif not write_back(target.path, res):
            status = 1
    _summary(results, args.diff)
    return status


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
            print(f"{r.shown}:{f.span.line}:{f.span.col + 1}: {verb} {f.code}: {fix.title} (digits lost "
                  f"{fix.measured_digits_lost_before:.1f} → {fix.measured_digits_lost_after:.1f}, measured)", file=out)
    left = sum(len(r.unfixed) for r in results)
    verb = "would be applied" if diff else "applied"
    summary = f"{n} fix{'es' if n != 1 else ''} {verb} in {files} file{'s' if files != 1 else ''}"
    if left:
        summary += f"; {left} finding{'s' if left != 1 else ''} without a verified fix"
    print(summary, file=out)
