"""Running the core over files and trees: discovery, configuration per path, notebooks, processes, shards."""
from __future__ import annotations

import fnmatch
import os
from dataclasses import dataclass, field, replace
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Iterator

from condhint.config import Config
from condhint.engine import FormulaStore, ModuleAnalysis, analyse_module, attach_formulas
from condhint.expr import Span
from condhint.findings import FileReport
from condhint.fixing import attach_fixes
from condhint.site_findings import not_analysed
from condhint.sourcefile import UnreadableFile, read_source

if TYPE_CHECKING:
    from condhint.diskcache import DiskCache
    from condhint.review.shard import Shard
    from condhint.review.written import Written

SKIP_DIRS = {"__pycache__", "node_modules", "site-packages", "venv", "env", "build", "dist"}


def _is_venv(d: Path) -> bool:
    return (d / "pyvenv.cfg").exists()


@dataclass
class Target:
    path: Path  # on disk
    shown: str  # as reported: the argument joined with the file's relative path


def _matches(rel: str, patterns: Iterable[str]) -> bool:
    name = rel.rsplit("/", 1)[-1]
    return any(fnmatch.fnmatch(rel, p) or fnmatch.fnmatch(name, p) for p in patterns)


def discover(paths: list[str], cfg: Config) -> Iterator[Target]:
    """Files to check: files as given; directories walked for the include globs, skipping hidden and venv dirs."""
    seen: set[Path] = set()
    for arg in paths:
        p = Path(arg)
        if p.is_file():
            if p.resolve() not in seen:
                seen.add(p.resolve())
                yield Target(p, arg)
            continue
        if not p.is_dir():
            yield Target(p, arg)  # reported as unreadable
            continue
        for root, dirs, files in os.walk(p):
            rootp = Path(root)
            dirs[:] = sorted(d for d in dirs if not d.startswith(".") and d not in SKIP_DIRS
                             and not _is_venv(rootp / d))
            for name in sorted(files):
                fp = rootp / name
                rel = fp.relative_to(p).as_posix()
                if not _matches(rel, cfg.include) or _matches(rel, cfg.exclude):
                    continue
                if fp.resolve() in seen:
                    continue
                seen.add(fp.resolve())
                shown = rel if arg in (".", "./") else f"{arg.rstrip('/')}/{rel}"
                yield Target(fp, shown)


def path_order(shown: str) -> tuple:
    """The order files are reported in: by path, a directory's files before its subdirectories.

    It is the walk's own order, applied across all arguments, so merged shards come out as one run would.
    """
    parts = shown.replace("\\", "/").split("/")
    return tuple((1, p) for p in parts[:-1]) + ((0, parts[-1]),)


def check_target(target: Target, cfg: Config, fixes: bool = False, cache: "DiskCache | None" = None,
                 written: "Written | None" = None) -> FileReport:
    """Analyse one file; an unreadable file yields a CH001 finding instead of an exception.

    With `fixes`, verified rewrites are attached to the findings (when the rewrites package is present).
    With `cache`, an unchanged file's report comes from the on-disk cache (and a changed file's unchanged
    expressions' κ formulas). With `written`, fixes and κ formulas are computed only for the findings the
    run will write.
    """
    if cache is None:
        return _checked(target, cfg, fixes, written)
    variant = written.key(target.shown) if written is not None and (fixes or cfg.kappa_formula) else ""
    return cache.check_target(target, cfg, fixes, partial(_checked, written=written, formulas=cache), variant)


def _checked(target: Target, cfg: Config, fixes: bool, written: "Written | None" = None,
             formulas: "FormulaStore | None" = None) -> FileReport:
    cfg = cfg.for_path(target.shown)
    if target.path.suffix == ".ipynb":
        from condhint.review.notebooks import check_notebook

        return check_notebook(target.path, target.shown, cfg)
    try:
        src = read_source(target.path)
    except UnreadableFile as exc:
        rep = FileReport(target.shown, "error", message=str(exc))
        rep.findings.append(not_analysed(target.shown, Span(1, 0, 1, 1), str(exc)))
        return rep
    analysis = analyse_module(src.text, target.shown, replace(cfg, kappa_formula=False))
    # inside the worker process, where the expression DAGs live
    _add_extras(analysis, cfg, fixes, written, formulas)
    return analysis.report


def _add_extras(ma: ModuleAnalysis, cfg: Config, fixes: bool, written: "Written | None",
                formulas: "FormulaStore | None") -> None:
    """κ formulas and verified fixes, for the findings that will be written (all without `written`)."""
    chosen = written.among(ma.report) if written is not None else None
    if cfg.kappa_formula:
        attach_formulas(ma, cfg, chosen, formulas)
    if fixes:
        attach_fixes(ma, cfg, chosen=chosen)


def _check_in_worker(job: tuple[Target, Config, bool, "DiskCache | None", "Written | None"]) -> FileReport:
    return check_target(*job)


@dataclass
class RunResult:
    reports: list[FileReport] = field(default_factory=list)

    @property
    def findings(self) -> list:
        return [f for r in self.reports for f in r.findings]


def check_paths(paths: list[str], cfg: Config, jobs: int = 1, shard: "Shard | None" = None,
                fixes: bool = False, show_progress: bool | None = None, cache: "DiskCache | None" = None,
                written: "Written | None" = None) -> RunResult:
    """Check files and trees: `jobs` worker processes, only `shard`'s part of the files, in path order;
    fixes and κ formulas only for the findings `written` (all without it)."""
    from condhint.review.parallel import map_ordered
    from condhint.review.progress import progress

    targets = sorted(discover(paths, cfg), key=lambda t: path_order(t.shown))
    if shard is not None:
        targets = [t for t in targets if shard.owns(t.shown)]
    with progress(len(targets), show_progress) as advance:
        if jobs <= 1 or len(targets) <= 1:
            reports = []
            for t in targets:
                reports.append(check_target(t, cfg, fixes, cache, written))
                advance()
        else:
            reports = map_ordered(_check_in_worker, [(t, cfg, fixes, cache, written) for t in targets], jobs, lambda i: advance())
    return RunResult(reports)
