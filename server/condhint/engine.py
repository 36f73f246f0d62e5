"""The pure core's entry point: source text in, findings out. No editor or protocol code here."""
from __future__ import annotations

import ast
import time
import warnings
from collections import OrderedDict
from dataclasses import dataclass, field

from condhint.config import Config
from condhint.budget import OverBudget, run_with_budget
from condhint.expr import Node, Span, topological
from condhint.findings import FileReport, Finding
from condhint.messages import finding_for, not_analysed
from condhint.numeric.analysis import Analysis, analyse
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.reading.comments import Clauses, find_comments
from condhint.reading.source import Source
from condhint.reading.walker import Walker
from condhint.site import Site
from condhint.symbolic import kappa_formula_text


class AnalysisCache:
    """Site analyses by structure, ranges and settings: equal expressions are analysed once."""

    def __init__(self, capacity: int = 20_000) -> None:
        self.capacity = capacity
        self._data: OrderedDict[str, Analysis] = OrderedDict()
        self.hits = self.misses = 0

    @staticmethod
    def key(site: Site, cfg: Config, root_key: str) -> str:
        ranges = sorted((k, repr(v.interval), v.source, v.uncertainty, v.uncertainty_abs, v.is_int)
                        for k, v in site.ranges.items())
        filters = [(f.condition.key(), f.holds) for f in site.filters]
        settings = (cfg.thresholds, cfg.default_range, cfg.samples, cfg.reference_samples, cfg.float_format)
        return f"{root_key}|{ranges}|{filters}|{settings}"

    def get(self, key: str) -> Analysis | None:
        a = self._data.get(key)
        if a is not None:
            self._data.move_to_end(key)
            self.hits += 1
        else:
            self.misses += 1
        return a

    def put(self, key: str, value: Analysis) -> None:
        self._data[key] = value
        self._data.move_to_end(key)
        while len(self._data) > self.capacity:
            self._data.popitem(last=False)


DEFAULT_CACHE = AnalysisCache(capacity=8000)  # about 2.5 KiB an entry


@dataclass
class ModuleAnalysis:
    """Everything the adapters need about one file: sites, analyses, findings."""

    report: FileReport
    source: Source | None = None
    sites: list[Site] = field(default_factory=list)
    analyses: dict[int, Analysis] = field(default_factory=dict)  # id(site) -> analysis
    comments: list[Clauses] = field(default_factory=list)
    walker: Walker | None = None


def parse(text: str) -> tuple[ast.Module | None, Finding | None]:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return ast.parse(text), None
    except SyntaxError as exc:
        line = max(exc.lineno or 1, 1)
        col = max((exc.offset or 1) - 1, 0)
        span = Span(line, col, line, col + 1)
        return None, not_analysed("", span, f"syntax error: {exc.msg}; the file is not analysed until it parses")
    except (ValueError, RecursionError, MemoryError) as exc:
        if isinstance(exc, (RecursionError, MemoryError)):  # CPython's parser gives no text for some of these
            msg = "the file is nested too deeply for Python's parser (Python cannot compile it either)"
        else:
            msg = "the file contains null bytes" if "null" in str(exc) else f"the file cannot be parsed: {exc}"
        return None, not_analysed("", Span(1, 0, 1, 1), msg)


def analyse_site(site: Site, cfg: Config, cache: AnalysisCache | None = DEFAULT_CACHE) -> Analysis:
    return _analysis_of(site, cfg, cache, compute=True)  # type: ignore[return-value]


def _analysis_of(site: Site, cfg: Config, cache: AnalysisCache | None, compute: bool) -> Analysis | None:
    """The site's analysis from the cache, or computed (None when it is not cached and `compute` is false)."""
    key = AnalysisCache.key(site, cfg, site.root.key()) if cache is not None else ""
    if cache is not None:
        hit = cache.get(key)
        if hit is not None:
            return hit
    if not compute:
        return None
    result = analyse(site, cfg, deadline=Deadline(cfg.site_budget))
    if cache is not None:
        cache.put(key, result)
    return result


def analyse_module(text: str, path: str, cfg: Config, cache: AnalysisCache | None = DEFAULT_CACHE,
                   tree: ast.Module | None = None, fixes: bool = False) -> ModuleAnalysis:
    t0 = time.perf_counter()
    report = FileReport(path=path, status="ok", lines=text.count("\n") + 1)
    if tree is None:
        tree, err = parse(text)
        if err is not None:
            err.path = path
            report.status = "syntax-error"
            report.findings.append(err)
            report.message = err.message
            report.seconds = time.perf_counter() - t0
            return ModuleAnalysis(report)
    source = Source(text)
    comments = find_comments(text)
    out = ModuleAnalysis(report, source, comments=comments)
    for c in comments:
        for e in c.errors:
            report.findings.append(not_analysed(path, Span(c.line, 0, c.line, len(source.lines[c.line - 1])),
                                                f"condhint comment not understood: {e}"))
    walker = Walker(source, tree, comments, cfg.max_site_nodes)
    out.walker = walker
    try:
        sites = walker.run()
    except RecursionError:
        sites = walker.sites
        report.findings.append(not_analysed(path, Span(1, 0, 1, 1), "the file is nested too deeply to analyse"))
    for span, why in walker.problems:
        report.findings.append(not_analysed(path, span, why))
    out.sites = sites
    best: dict[tuple[int, int, int, int, str], Finding] = {}
    t_sites, left = time.perf_counter(), []
    for site in sites:
        in_budget = time.perf_counter() - t_sites <= cfg.file_budget  # past it, only cached analyses are used
        try:
            a = _analysis_of(site, cfg, cache, compute=in_budget)
            if a is None:
                left.append(site)
                continue
        except BudgetExceeded:
            report.findings.append(not_analysed(
                path, site.span, f"not analysed: the expression exceeded its time budget of {cfg.site_budget:g} s",
                site.scope, site.root.text))
            continue
        except (RecursionError, MemoryError, OverflowError, ValueError, ZeroDivisionError) as exc:
            report.findings.append(not_analysed(path, site.span, f"not analysed: {type(exc).__name__}: {exc}",
                                                site.scope, site.root.text))
            continue
        out.analyses[id(site)] = a
        f = finding_for(site, a, cfg, path)
        if f is None:
            continue
        f._site = site  # type: ignore[attr-defined]
        k = (f.span.line, f.span.col, f.span.end_line, f.span.end_col, f.code)
        prev = best.get(k)
        if prev is None or (f.digits_lost or 0) > (prev.digits_lost or 0):
            best[k] = f
    if left:
        report.findings.append(not_analysed(
            path, left[0].span, f"not analysed: the file exceeded its time budget of {cfg.file_budget:g} s; "
            f"{len(left)} expression{'s' if len(left) > 1 else ''} from line {left[0].span.line} on "
            f"{'were' if len(left) > 1 else 'was'} not analysed (raise `file_budget` to analyse them)",
            left[0].scope, left[0].root.text))
    findings = sorted(best.values(), key=lambda f: (f.span.line, f.span.col, f.code))
    if cfg.kappa_formula:
        for f in findings:
            f.kappa_formula = kappa_formula(f._site, cfg)  # type: ignore[attr-defined]
    report.findings.extend(findings)
    _apply_suppressions(report, comments)
    report.findings = [f for f in report.findings if _at_least(f.severity, cfg.min_severity)]
    report.findings.sort(key=lambda f: (f.span.line, f.span.col, f.code))
    if fixes and cfg.fixes:  # verified rewrites: only when asked, so checking stays fast
        from condhint.rewrites import attach_fixes

        attach_fixes(out, cfg, cache)
    report.seconds = time.perf_counter() - t0
    return out


_FORMULAS: OrderedDict[str, str | None] = OrderedDict()


def kappa_formula(site: Site, cfg: Config, root: Node | None = None) -> str | None:
    """The symbolic κ formula of a site's expression, or None when sympy cannot give it within the budget."""
    root = root or site.root
    positive = {k for k, r in site.ranges.items() if r.interval.low >= 0}
    key = f"{root.key()}|{sorted(positive)}"
    if key in _FORMULAS:
        return _FORMULAS[key]
    if len(topological(root)) > 60:
        text = None
    else:
        try:
            text = run_with_budget(kappa_formula_text, (root, positive), cfg.formula_budget)
        except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, ZeroDivisionError):
            text = None
    _FORMULAS[key] = text
    while len(_FORMULAS) > 4096:
        _FORMULAS.popitem(last=False)
    return text


def _at_least(severity: str, minimum: str) -> bool:
    order = {"info": 1, "warning": 2, "error": 3}
    return order[severity] >= order[minimum]


def _apply_suppressions(report: FileReport, comments: list[Clauses]) -> None:
    ignores = {c.line: c.ignore for c in comments if c.ignore is not None}
    if not ignores:
        return
    kept = []
    for f in report.findings:
        lines = range(f.span.line, f.span.end_line + 1)
        codes = [ignores[ln] for ln in lines if ln in ignores]
        if any(not c or f.code in c for c in codes):
            f.suppressed = True
            report.suppressed.append(f)
        else:
            kept.append(f)
    report.findings = kept


def check_source(text: str, path: str = "<string>", cfg: Config | None = None) -> FileReport:
    """Findings for one file's text (the layered API's lowest level)."""
    return analyse_module(text, path, cfg or Config()).report
