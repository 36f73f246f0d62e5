"""Running the core over files and trees: file discovery, configuration per path, notebooks later."""
from __future__ import annotations

import fnmatch
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable, Iterator

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.expr import Span
from condhint.findings import FileReport
from condhint.messages import not_analysed
from condhint.sourcefile import UnreadableFile, read_source

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


def check_target(target: Target, cfg: Config) -> FileReport:
    """Analyse one file; an unreadable file yields a CH001 finding instead of an exception."""
    try:
        src = read_source(target.path)
    except UnreadableFile as exc:
        rep = FileReport(target.shown, "error", message=str(exc))
        rep.findings.append(not_analysed(target.shown, Span(1, 0, 1, 1), str(exc)))
        return rep
    return analyse_module(src.text, target.shown, cfg.for_path(target.shown)).report


@dataclass
class RunResult:
    reports: list[FileReport] = field(default_factory=list)

    @property
    def findings(self) -> list:
        return [f for r in self.reports for f in r.findings]


def check_paths(paths: list[str], cfg: Config) -> RunResult:
    return RunResult([check_target(t, cfg) for t in discover(paths, cfg)])
