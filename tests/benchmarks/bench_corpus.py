"""Real code nobody here wrote: `check` over the installed sources of numpy, scipy, sympy and mpmath.

Reports files, lines, seconds, lines/s, findings by code and severity, crashes (must be 0), the slowest
files and, within them, the slowest sites; with --compare also the floor (`ast.parse`) and pyflakes on the
same files; with --review N a deterministic sample of N warnings with their source lines, for reading.

    python tests/benchmarks/bench_corpus.py                      # the whole corpus (takes a while)
    python tests/benchmarks/bench_corpus.py --per-package 60     # a fixed subset, as CI runs it
    python tests/benchmarks/bench_corpus.py --json out.json --review 30

Files go through `runner.check_target`, the code path of `condhint check`. An exception escaping it is a
crash: it is counted, its traceback kept, and the run goes on.
"""
from __future__ import annotations

import argparse
import ast
import faulthandler
import hashlib
import importlib.util
import json
import resource
import sys
import time
import traceback
import warnings
from collections import Counter
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Callable

from condhint.config import Config
from condhint.engine import DEFAULT_CACHE, analyse_module, analyse_site
from condhint.numeric.evaluate import BudgetExceeded
from condhint.runner import Target, check_target, discover
from condhint.sourcefile import UnreadableFile, read_source

PACKAGES = ("numpy", "scipy", "sympy", "mpmath")


def package_root(name: str) -> Path | None:
    """The installed package's directory (found with importlib, not imported)."""
    spec = importlib.util.find_spec(name)
    if spec is None or not spec.submodule_search_locations:
        return None
    return Path(list(spec.submodule_search_locations)[0])


def corpus_targets(packages: tuple[str, ...] = PACKAGES, cfg: Config | None = None) -> list[tuple[str, Target]]:
    """(package, target) for every file `check` would visit under each installed package, in a stable order."""
    cfg = cfg or Config()
    out: list[tuple[str, Target]] = []
    for name in packages:
        root = package_root(name)
        if root is None:
            continue
        for t in discover([str(root)], cfg):
            t.shown = f"{name}/{t.path.relative_to(root).as_posix()}"
            out.append((name, t))
    return out


def _rank(shown: str) -> str:
    return hashlib.sha256(shown.encode()).hexdigest()


def fixed_subset(targets: list[tuple[str, Target]], per_package: int, max_bytes: int | None = None
                 ) -> list[tuple[str, Target]]:
    """The same files on every run (chosen by a hash of the file's path, spread over each package),
    optionally only files of at most `max_bytes` bytes."""
    by_pkg: dict[str, list[tuple[str, Target]]] = {}
    for pkg, t in targets:
        if max_bytes is not None and t.path.stat().st_size > max_bytes:
            continue
        by_pkg.setdefault(pkg, []).append((pkg, t))
    out: list[tuple[str, Target]] = []
    for items in by_pkg.values():
        out += sorted(items, key=lambda it: _rank(it[1].shown))[:per_package]
    return sorted(out, key=lambda it: it[1].shown)


@dataclass
class FileResult:
    path: str
    package: str
    lines: int
    seconds: float
    status: str
    findings: list[dict[str, Any]] = field(default_factory=list)


@dataclass
class CorpusResult:
    files: list[FileResult] = field(default_factory=list)
    crashes: list[tuple[str, str]] = field(default_factory=list)  # (path, traceback)
    seconds: float = 0.0
    peak_rss_mb: float = 0.0
    cache_entries: int = 0
    slow_sites: list[dict[str, Any]] = field(default_factory=list)
    floor: dict[str, float] = field(default_factory=dict)

    @property
    def lines(self) -> int:
        return sum(f.lines for f in self.files)

    def findings(self) -> list[dict[str, Any]]:
        return [d for f in self.files for d in f.findings]

    def summary(self) -> dict[str, Any]:
        fs = self.findings()
        by_code_sev = Counter(f"{d['code']} {d['severity']}" for d in fs)
        return {
            "files": len(self.files), "lines": self.lines, "seconds": round(self.seconds, 2),
            "lines_per_second": round(self.lines / self.seconds) if self.seconds else None,
            "crashes": len(self.crashes), "crash_paths": [p for p, _ in self.crashes],
            "status": dict(Counter(f.status for f in self.files)),
            "findings": len(fs), "by_code": dict(sorted(Counter(d["code"] for d in fs).items())),
            "by_severity": dict(sorted(Counter(d["severity"] for d in fs).items())),
            "by_code_and_severity": dict(sorted(by_code_sev.items())),
            "by_package": {p: {"files": sum(1 for f in self.files if f.package == p),
                               "lines": sum(f.lines for f in self.files if f.package == p),
                               "seconds": round(sum(f.seconds for f in self.files if f.package == p), 2),
                               "findings": sum(len(f.findings) for f in self.files if f.package == p)}
                           for p in sorted({f.package for f in self.files})},
            "max_file_seconds": round(max((f.seconds for f in self.files), default=0.0), 3),
            "slowest_files": [{"path": f.path, "lines": f.lines, "seconds": round(f.seconds, 3)}
                              for f in sorted(self.files, key=lambda f: -f.seconds)[:10]],
            "slowest_sites": self.slow_sites,
            "peak_rss_mb": round(self.peak_rss_mb, 1), "analysis_cache_entries": self.cache_entries,
            "floor": self.floor,
        }


def _lines(target: Target) -> int:
    try:
        return read_source(target.path).text.count("\n") + 1
    except UnreadableFile:
        return 0


def run_corpus(targets: list[tuple[str, Target]], cfg: Config,
               progress: Callable[[int, int, str], None] | None = None, file_timeout: float = 60.0) -> CorpusResult:
    """Check each file; a file still running after `file_timeout` s gets a traceback dump on stderr."""
    res = CorpusResult()
    t_all = time.perf_counter()
    for i, (pkg, t) in enumerate(targets):
        if progress:
            progress(i, len(targets), t.shown)
        t0 = time.perf_counter()
        faulthandler.dump_traceback_later(file_timeout, exit=False)
        try:
            rep = check_target(t, cfg)
        except Exception:  # a crash: counted, kept, and the run goes on
            res.crashes.append((t.shown, traceback.format_exc()))
            res.files.append(FileResult(t.shown, pkg, _lines(t), time.perf_counter() - t0, "crash"))
            continue
        finally:
            faulthandler.cancel_dump_traceback_later()
        dt = time.perf_counter() - t0
        res.files.append(FileResult(t.shown, pkg, rep.lines if rep.status != "error" else 0, dt, rep.status,
                                    [f.to_dict() for f in rep.findings]))
    res.seconds = time.perf_counter() - t_all
    res.peak_rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    res.cache_entries = len(DEFAULT_CACHE._data)
    return res


def slowest_sites(res: CorpusResult, targets: dict[str, Target], cfg: Config, n_files: int = 5,
                  n_sites: int = 10) -> list[dict[str, Any]]:
    """Re-analyse the slowest files without the cache and time each site."""
    timed: list[dict[str, Any]] = []
    for f in sorted(res.files, key=lambda f: -f.seconds)[:n_files]:
        t = targets[f.path]
        try:
            text = read_source(t.path).text
        except UnreadableFile:
            continue
        mod = analyse_module(text, f.path, cfg, cache=None)
        for site in mod.sites:
            t0 = time.perf_counter()
            outcome = "ok"
            try:
                analyse_site(site, cfg, cache=None)
            except BudgetExceeded:
                outcome = "budget"
            except Exception as exc:  # noqa: BLE001 - reported, as the engine does
                outcome = type(exc).__name__
            timed.append({"path": f.path, "line": site.span.line, "seconds": round(time.perf_counter() - t0, 3),
                          "outcome": outcome, "expression": " ".join(site.root.text.split())[:80]})
    return sorted(timed, key=lambda d: -d["seconds"])[:n_sites]


def floor_times(targets: list[tuple[str, Target]]) -> dict[str, float]:
    """The same files through `ast.parse` (the floor) and pyflakes (an ordinary checker), for ratios."""
    texts = []
    for _, t in targets:
        try:
            texts.append((t.shown, read_source(t.path).text))
        except UnreadableFile:
            pass
    out: dict[str, float] = {}
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _, text in texts:
            try:
                ast.parse(text)
            except (SyntaxError, ValueError):
                pass
    out["ast_parse_seconds"] = round(time.perf_counter() - t0, 2)
    try:
        from pyflakes import api, reporter
    except ImportError:
        return out
    import io

    sink = reporter.Reporter(io.StringIO(), io.StringIO())
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for name, text in texts:
            api.check(text, name, sink)
    out["pyflakes_seconds"] = round(time.perf_counter() - t0, 2)
    return out


def review_sample(res: CorpusResult, targets: dict[str, Target], n: int, seed: str = "review") -> str:
    """N warnings (and errors) picked by a hash, with the source line, as Markdown for reading by hand."""
    ws = [d for d in res.findings() if d["severity"] in ("warning", "error")]
    ws.sort(key=lambda d: hashlib.sha256(f"{seed}{d['path']}:{d['line']}:{d['column']}{d['code']}".encode()).hexdigest())
    out = []
    for i, d in enumerate(ws[:n], 1):
        text = read_source(targets[d["path"]].path).text.splitlines()
        lo, hi = max(d["line"] - 3, 0), min(d["end_line"] + 1, len(text))
        context = "\n".join(f"{k + 1:5d}  {text[k]}" for k in range(lo, hi))
        out.append(f"### {i}. {d['path']}:{d['line']} {d['code']} {d['severity']}\n\n{d['message']}\n\n"
                   f"```\n{context}\n```\n")
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--packages", nargs="*", default=list(PACKAGES))
    ap.add_argument("--per-package", type=int, metavar="N", help="a fixed subset: N files of each package")
    ap.add_argument("--max-bytes", type=int, metavar="B", help="with --per-package: only files of at most B bytes")
    ap.add_argument("--json", metavar="FILE", help="write the summary (and crash tracebacks) as JSON")
    ap.add_argument("--review", type=int, metavar="N", default=0, help="print N sampled warnings for review")
    ap.add_argument("--review-out", metavar="FILE", help="write the review sample to FILE")
    ap.add_argument("--compare", action="store_true", help="also time ast.parse and pyflakes on the same files")
    ap.add_argument("--no-sites", action="store_true", help="skip timing the sites of the slowest files")
    ap.add_argument("--file-timeout", type=float, default=60.0, metavar="S",
                    help="dump a traceback when one file takes longer than S seconds")
    ap.add_argument("--verbose", action="store_true", help="name every file as it starts")
    ap.add_argument("--default-range", nargs=2, type=float, metavar=("LOW", "HIGH"),
                    help="range for inputs without a declared one (to measure its effect on the findings)")
    ap.add_argument("--no-formulas", action="store_true",
                    help="skip the symbolic κ formulas, as `check` does for text and Markdown output")
    ap.add_argument("--quiet", action="store_true")
    args = ap.parse_args(argv)

    cfg = Config(default_range=tuple(args.default_range)) if args.default_range else Config()
    cfg = replace(cfg, kappa_formula=not args.no_formulas)
    targets = corpus_targets(tuple(args.packages), cfg)
    if args.per_package:
        targets = fixed_subset(targets, args.per_package, args.max_bytes)
    if not targets:
        print("no installed package found among " + ", ".join(args.packages), file=sys.stderr)
        return 2

    def progress(i: int, n: int, path: str) -> None:
        if args.verbose or (not args.quiet and i % 50 == 0):
            print(f"[{i}/{n}] {path}", file=sys.stderr, flush=True)

    res = run_corpus(targets, cfg, progress, args.file_timeout)
    by_shown = {t.shown: t for _, t in targets}
    if not args.no_sites:
        res.slow_sites = slowest_sites(res, by_shown, cfg)
    if args.compare:
        res.floor = floor_times(targets)
        ch = res.seconds
        if res.floor.get("ast_parse_seconds"):
            res.floor["condhint_over_ast_parse"] = round(ch / res.floor["ast_parse_seconds"], 1)
        if res.floor.get("pyflakes_seconds"):
            res.floor["condhint_over_pyflakes"] = round(ch / res.floor["pyflakes_seconds"], 2)
    summary = res.summary()
    print(json.dumps(summary, indent=2))
    for path, tb in res.crashes:
        print(f"CRASH {path}\n{tb}", file=sys.stderr)
    if args.json:
        detail = {"crash_tracebacks": dict(res.crashes),
                  "per_file": [{"path": f.path, "lines": f.lines, "seconds": round(f.seconds, 3), "status": f.status}
                               for f in res.files],
                  "all_findings": res.findings()}
        Path(args.json).write_text(json.dumps({**summary, **detail}, indent=2, default=str))
    if args.review:
        text = review_sample(res, by_shown, args.review)
        if args.review_out:
            Path(args.review_out).write_text(text, encoding="utf-8")
        else:
            print(text)
    return 1 if res.crashes else 0


if __name__ == "__main__":
    sys.exit(main())
