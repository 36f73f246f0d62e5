"""The review options of `condhint check`: parallel and sharded runs, changed lines, baselines, statistics."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from condhint.commands.common import UsageError
from condhint.review.written import Written


def _jobs(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if n < 1:
        raise argparse.ArgumentTypeError("expected at least 1")
    return n


def _shard(text: str) -> Any:
    from condhint.review.shard import parse_shard

    try:
        return parse_shard(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_review_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("review and CI")
    g.add_argument("--jobs", "-j", type=_jobs, metavar="N",
                   help="analyse files in N processes (default: the machine's cores)")
    g.add_argument("--cache-dir", nargs="?", const="", metavar="DIR",
                   help="reuse results of unchanged files from an on-disk cache, safe to share between runs and "
                        "processes (default DIR: $CONDHINT_CACHE_DIR or ~/.cache/condhint)")
    g.add_argument("--shard", type=_shard, metavar="K/N",
                   help="check only part K of N of the files (stable by path); combine with `condhint merge`")
    g.add_argument("--diff-base", metavar="REV",
                   help="report only findings on lines added or changed since the git revision REV")
    g.add_argument("--baseline", metavar="FILE", help="report only findings not recorded in FILE")
    g.add_argument("--write-baseline", metavar="FILE",
                   help="record the current findings in FILE (the run then exits 0)")


def run_settings(args: argparse.Namespace) -> dict[str, Any]:
    """Keyword arguments of `runner.check_paths` from the options."""
    from condhint.review.parallel import default_jobs

    cache = None
    if args.cache_dir is not None:
        from condhint.diskcache import DiskCache, default_dir

        cache = DiskCache(default_dir() if args.cache_dir == "" else Path(args.cache_dir))
    return {"jobs": args.jobs or default_jobs(), "shard": args.shard, "cache": cache}


class Narrowing:
    """--write-baseline, --baseline and --diff-base. Their inputs are read before the (long) analysis,
    so a bad revision or baseline fails at once with exit 2."""

    def __init__(self, args: argparse.Namespace) -> None:
        self.args = args
        self.accepted = None
        self.changed = None
        if args.baseline:
            from condhint.review.baseline import BaselineError, read_baseline

            try:
                self.accepted = read_baseline(Path(args.baseline))
            except BaselineError as exc:
                raise UsageError(str(exc)) from None
        if args.diff_base:
            from condhint.review.diff_base import GitError, changed_since

            try:
                self.changed = changed_since(args.diff_base, args.paths)
            except GitError as exc:
                raise UsageError(str(exc)) from None

    def written(self, codes: set[str], min_severity: str) -> Written:
        """Which findings of a file the run will write: `codes` from `min_severity` on, narrowed like `apply`."""
        baseline = Path(self.args.baseline) if self.accepted is not None else None
        return Written(frozenset(codes), min_severity, baseline, self.accepted, self.changed)

    def apply(self, reports: list) -> list[str]:
        """Narrow the reports in place; returns notes for stderr."""
        args, notes = self.args, []
        if args.write_baseline:
            from condhint.review.baseline import write_baseline

            n = write_baseline(Path(args.write_baseline), reports)
            notes.append(f"wrote {n} finding{'s' if n != 1 else ''} to the baseline {args.write_baseline}")
        if self.accepted is not None:
            from condhint.review.baseline import keep_new

            n = keep_new(reports, Path(args.baseline), self.accepted)
            if n:
                notes.append(f"{n} finding{'s' if n != 1 else ''} in the baseline not shown")
        if self.changed is not None:
            from condhint.review.diff_base import keep_changed

            n = keep_changed(reports, self.changed)
            if n:
                notes.append(f"{n} finding{'s' if n != 1 else ''} on lines unchanged since {args.diff_base} "
                             "not shown")
        return notes


def statistics_text(args: argparse.Namespace, reports: list, min_severity: str) -> str:
    """The `--statistics` table appended to text output."""
    if not args.statistics or args.format != "text":
        return ""
    from condhint.review.statistics import table

    return "\n" + table(reports, min_severity)


def print_notes(notes: list[str]) -> None:
    for n in notes:
        print(f"condhint: {n}", file=sys.stderr)
