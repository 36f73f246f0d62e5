"""The pure core's entry point: source text in, findings out. No editor or protocol code here.

A module is read once into a `ModuleIndex` and analysed unit by unit (its module-level code, then each
top-level definition). The command line and the language server run the same analysis; the server passes a
`UnitCache`, so an edit re-analyses only the units whose key changed (their text and place, the definitions
they call, the module context, the settings). Below that, `AnalysisCache` analyses equal expressions once.
"""
from __future__ import annotations

import logging
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Callable, Generic, Hashable, Protocol, TypeVar

from condhint.budget import OverBudget, run_with_budget
from condhint.config import Config
from condhint.expr import CONST, INPUT, Node, Span, topological
from condhint.findings import SEVERITY_RANK, FileReport, Finding
from condhint.loop_findings import loop_findings
from condhint.numeric.analysis import Analysis
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.numeric.site_analysis import analyse_site_values
from condhint.reading.comments import Clauses
from condhint.reading.imported import dependency_stamp
from condhint.reading.module_index import ModuleIndex, Unit, read_module
from condhint.reading.statements import Walker
from condhint.recurrence import Recurrence
from condhint.site import Site
from condhint.kinds import NOT_ANALYSED
from condhint.site_findings import findings_for, not_analysed
from condhint.symbolic import kappa_formula_text

K, V = TypeVar("K"), TypeVar("V")
log = logging.getLogger(__name__)


class Abandoned(Exception):
    """A newer version of the document arrived: this analysis is no longer wanted."""


class Lru(Generic[V]):
    """A bounded, thread-safe map that forgets the least recently used entry first."""

    def __init__(self, capacity: int) -> None:
        self.capacity = capacity
        self._data: OrderedDict[Hashable, V] = OrderedDict()
        self._lock = threading.Lock()
        self.hits = self.misses = 0

    def get(self, key: Hashable) -> V | None:
        with self._lock:
            v = self._data.get(key)
            if v is not None:
                self._data.move_to_end(key)
                self.hits += 1
            else:
                self.misses += 1
            return v

    def put(self, key: Hashable, value: V) -> None:
        with self._lock:
            self._data[key] = value
            self._data.move_to_end(key)
            while len(self._data) > self.capacity:
                self._data.popitem(last=False)


class AnalysisCache(Lru[Analysis]):
    """Site analyses by structure, ranges and settings: equal expressions are analysed once."""

    def __init__(self, capacity: int = 20_000) -> None:
        super().__init__(capacity)

    @staticmethod
    def key(site: Site, cfg: Config, root_key: str) -> str:
        ranges = sorted((k, repr(v.interval), v.source, v.uncertainty, v.uncertainty_abs, v.is_int)
                        for k, v in site.ranges.items())
        filters = [(f.condition.key(), f.holds) for f in site.filters]
        settings = (cfg.thresholds, cfg.default_range, cfg.samples, cfg.reference_samples, cfg.float_format)
        arrays = f"|{sorted((k, repr(v)) for k, v in site.arrays.items())}{cfg.array_length}" if site.arrays else ""
        return f"{root_key}|{ranges}|{filters}|{settings}{arrays}"


DEFAULT_CACHE = AnalysisCache(capacity=8000)  # about 2.5 KiB an entry
LOOP_CACHE: Lru[object] = Lru(2000)  # loop measurements by structure, ranges and settings (`loop_findings`)


@dataclass
class UnitAnalysis:
    """One unit's sites, their analyses and findings (in the positions of the text it was read from)."""

    unit: Unit
    key: str
    sites: list[Site] = field(default_factory=list)
    analyses: dict[int, Analysis] = field(default_factory=dict)  # id(site) -> analysis
    findings: list[Finding] = field(default_factory=list)
    left: list[Site] = field(default_factory=list)  # not analysed: the time budget ran out
    constants: dict[str, Node] = field(default_factory=dict, repr=False)  # module constants its nodes share
    recurrences: list[Recurrence] = field(default_factory=list)  # its loops read as recurrences (issue 15)

    def site(self, number: int) -> Site | None:
        return self.sites[number] if 0 <= number < len(self.sites) else None


class UnitCache(Lru[UnitAnalysis]):
    """Analysed units by key (the language server's reuse of unchanged definitions)."""

    def __init__(self, capacity: int = 1024) -> None:
        super().__init__(capacity)


@dataclass
class ModuleAnalysis:
    """Everything the adapters need about one file: its index, units, sites, analyses and findings."""

    report: FileReport
    index: ModuleIndex | None = None
    units: list[UnitAnalysis] = field(default_factory=list)
    analysed: int = 0  # units analysed in this run
    reused: int = 0  # units taken from the unit cache
    site_misses: int = 0  # expressions analysed (not found in the AnalysisCache) in this run

    @property
    def findings(self) -> list[Finding]:
        return self.report.findings

    @property
    def status(self) -> str:
        return self.report.status

    @property
    def seconds(self) -> float:
        return self.report.seconds

    @property
    def sites(self) -> list[Site]:
        return [s for u in self.units for s in u.sites]

    @property
    def comments(self) -> list[Clauses]:
        return self.index.comments if self.index is not None else []

    def analysis_of(self, site: Site) -> Analysis | None:
        for u in self.units:
            a = u.analyses.get(id(site))
            if a is not None:
                return a
        return None

    def site_of(self, finding: Finding) -> Site | None:
        """The analysed site a finding reports on (through its `origin`), or None."""
        key, _, number = finding.origin.rpartition("#")
        unit = next((u for u in self.units if u.key == key), None)
        return unit.site(int(number)) if unit is not None and number.isdigit() else None

    def unit_at(self, line: int) -> UnitAnalysis | None:
        if self.index is None:
            return None
        unit = self.index.unit_at(line)
        return next((u for u in self.units if u.unit == unit), None)

    def node_at(self, line: int, col: int) -> tuple[Site, Node] | None:
        """The innermost operation with inputs, of any analysed expression, whose source range contains the
        position (line 1-based, column in code points): in the definition holding the line, else in the
        module-level code (decorators, module statements)."""
        at = Span(line, col, line, col)
        owner = self.unit_at(line)
        for u in [owner, self.units[0] if self.units else None]:
            if u is None:
                continue
            best: tuple[Site, Node] | None = None
            best_size = None
            for site in u.sites:
                for node in topological(site.root):
                    if node.span is None or node.is_leaf or not _contains(node.span, at) or not _has_inputs(node):
                        continue
                    size = (node.span.end_line - node.span.line, node.span.end_col - node.span.col
                            if node.span.line == node.span.end_line else 10**6)
                    if best_size is None or size < best_size:
                        best, best_size = (site, node), size
            if best is not None:
                return best
        return None


def _has_inputs(node: Node) -> bool:
    """Constant subexpressions (`RHO_SEA * G`) have no condition to show: the enclosing one is meant."""
    return any(n.kind == INPUT for n in topological(node))


def _contains(span: Span, at: Span) -> bool:
    return (span.line, span.col) <= (at.line, at.col) <= (span.end_line, span.end_col)


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
    result = analyse_site_values(site, cfg, deadline=Deadline(cfg.site_budget))
    if cache is not None:
        cache.put(key, result)
    return result


class _Budget:
    """Seconds of numeric analysis left (`file_budget`): past it, only cached analyses are used."""

    def __init__(self, seconds: float) -> None:
        self.seconds = seconds
        self.start = time.perf_counter()

    def open(self) -> bool:
        return time.perf_counter() - self.start <= self.seconds


def analyse_unit(index: ModuleIndex, unit: Unit, key: str, path: str, cfg: Config, cache: AnalysisCache | None,
                 budget: _Budget) -> UnitAnalysis:
    """Read one unit into sites, analyse each, and keep the worst finding per flagged range and code."""
    out = UnitAnalysis(unit, key, constants=index.constants)
    walker = Walker(index, cfg.max_site_nodes, cfg.format)
    problems: list[Finding] = []
    try:
        sites = walker.walk(unit)
    except RecursionError:
        sites = walker.sites
        problems.append(not_analysed(path, Span(unit.start, 0, unit.start, 1), "the file is nested too deeply to analyse"))
    except Exception as exc:  # noqa: BLE001 — a bug of ours in reading: say so, analyse what was read, go on
        log.exception("internal error reading %s:%d", path, unit.start)
        sites = walker.sites
        problems.append(not_analysed(path, Span(unit.start, 0, unit.start, 1),
                                     f"not read past this point: an internal error of condhint "
                                     f"({type(exc).__name__}: {exc}); please report it"))
    problems += [not_analysed(path, span, why) for span, why in walker.problems]
    out.sites = sites
    best: dict[tuple[int, int, int, int, str], Finding] = {}
    for number, site in enumerate(sites):
        try:
            a = _analysis_of(site, cfg, cache, compute=budget.open())
            if a is None:
                out.left.append(site)
                continue
        except BudgetExceeded:
            problems.append(not_analysed(
                path, site.span, f"not analysed: the expression exceeded its time budget of {cfg.site_budget:g} s",
                site.scope, site.root.text))
            continue
        except (RecursionError, MemoryError, OverflowError, ValueError, ZeroDivisionError) as exc:
            problems.append(not_analysed(path, site.span, f"not analysed: {type(exc).__name__}: {exc}",
                                         site.scope, site.root.text))
            continue
        except (KeyError, IndexError, TypeError, AttributeError) as exc:  # a bug of ours: say so, go on
            log.exception("internal error analysing %s:%d", path, site.span.line)
            problems.append(not_analysed(path, site.span, f"not analysed: an internal error of condhint "
                                         f"({type(exc).__name__}: {exc}); please report it", site.scope,
                                         site.root.text))
            continue
        out.analyses[id(site)] = a
        for f in findings_for(site, a, cfg, path, origin=f"{key}#{number}", symbolic=index.symbolic_numbers):
            k = (f.span.line, f.span.col, f.span.end_line, f.span.end_col, f.code)
            prev = best.get(k)
            if prev is None or (f.digits_lost or 0) > (prev.digits_lost or 0):
                best[k] = f
    # ---- loops read as recurrences (issue 15): measured by iterating them, `loop_findings.py` ----
    out.recurrences = walker.recurrences
    if walker.recurrences and budget.open():
        for f in loop_findings(walker.recurrences, cfg, path, key, LOOP_CACHE):
            k = (f.span.line, f.span.col, f.span.end_line, f.span.end_col, f.code)
            if f.code == NOT_ANALYSED.code:
                problems.append(f)
            elif k not in best or (f.digits_lost or 0) > (best[k].digits_lost or 0):
                best[k] = f
    findings = sorted(best.values(), key=lambda f: (f.span.line, f.span.col, f.code))
    out.findings = problems + findings
    return out


def _budget_left(path: str, left: list[Site], cfg: Config) -> Finding:
    n = len(left)
    return not_analysed(
        path, left[0].span, f"not analysed: the file exceeded its time budget of {cfg.file_budget:g} s; "
        f"{n} expression{'s' if n > 1 else ''} from line {left[0].span.line} on "
        f"{'were' if n > 1 else 'was'} not analysed (raise `file_budget` to analyse them)",
        left[0].scope, left[0].root.text)


def settings_key(cfg: Config) -> str:
    return repr(cfg)


def analyse_module(text: str, path: str, cfg: Config, cache: AnalysisCache | None = DEFAULT_CACHE, *,
                   units: UnitCache | None = None, tolerant: bool = False,
                   abandoned: Callable[[], bool] | None = None,
                   progress: Callable[[int, int], None] | None = None) -> ModuleAnalysis:
    """Findings of one file's text.

    `tolerant` (the editor's case): a text that does not parse is still analysed where it does, with one
    CH001 at the syntax error. `units` reuses unchanged units across calls, each then with a time budget of
    its own (`file_budget` covers the whole file otherwise). `abandoned()` is polled between units (raising
    `Abandoned` when true); `progress(done, total)` is called as units complete.
    """
    t0 = time.perf_counter()
    misses0 = cache.misses if cache is not None else 0
    report = FileReport(path=path, status="ok", lines=text.count("\n") + 1)
    index, problem = read_module(text, tolerant)
    out = ModuleAnalysis(report, index)
    if problem is not None:
        report.status = "syntax-error"
        if index is None:
            why = f"{problem.message}; the file is not analysed until it parses" if problem.syntax else problem.message
            err = not_analysed(path, problem.span, why)
            report.findings.append(err)
            report.message = err.message
        elif cfg.min_severity == "info":
            report.findings.append(not_analysed(path, problem.span, (
                f"{problem.message}; the definition or statement it is in is not analysed until it parses "
                "(the rest of the file is)")))
    if index is None:
        report.seconds = time.perf_counter() - t0
        return out
    for c in index.comments:
        for e in c.errors:
            report.findings.append(not_analysed(path, Span(c.line, 0, c.line, len(index.source.lines[c.line - 1])),
                                                f"condhint comment not understood: {e}"))
    index.path = path
    # a unit's analysis may depend on the package files its calls are inlined from (issue 15)
    settings = settings_key(cfg) + dependency_stamp(text, path)
    budget = _Budget(cfg.file_budget)
    left: list[Site] = []
    for i, unit in enumerate(index.units):
        if abandoned is not None and abandoned():
            raise Abandoned
        key = index.unit_key(unit, settings) if units is not None else f"{unit.name}:{unit.start}"
        done = units.get(key) if units is not None else None
        if done is None:
            done = analyse_unit(index, unit, key, path, cfg, cache, _Budget(cfg.file_budget) if units is not None else budget)
            if units is not None:
                units.put(key, done)
            out.analysed += 1
        else:
            out.reused += 1
        out.units.append(done)
        report.findings.extend(done.findings)
        if done.left and units is not None:
            report.findings.append(_budget_left(path, done.left, cfg))
        left += done.left
        if progress is not None:
            progress(i + 1, len(index.units))
    if left and units is None:
        report.findings.append(_budget_left(path, left, cfg))
    report.findings = _worst_per_range(report.findings)
    _apply_suppressions(report, index.comments)
    report.findings = [f for f in report.findings if SEVERITY_RANK[f.severity] >= SEVERITY_RANK[cfg.min_severity]]
    report.findings.sort(key=lambda f: (f.span.line, f.span.col, f.code))
    if cfg.kappa_formula:  # only for the findings that are left: the formulas are costly
        attach_formulas(out, cfg)
    out.site_misses = (cache.misses - misses0) if cache is not None else 0
    report.seconds = time.perf_counter() - t0
    return out


def attach_formulas(ma: ModuleAnalysis, cfg: Config, chosen: list[Finding] | None = None,
                    store: FormulaStore | None = None) -> None:
    """Give the module's findings, suppressed ones too (or only those `chosen`), their symbolic κ formula."""
    for f in chosen if chosen is not None else [*ma.report.findings, *ma.report.suppressed]:
        site = ma.site_of(f)
        f.kappa_formula = kappa_formula(site, cfg, store=store) if site is not None else None


_FORMULAS: Lru[str] = Lru(4096)
_NO_FORMULA = ""


class FormulaStore(Protocol):
    """Formulas kept between runs (`diskcache.DiskCache`), by `formula_key`."""

    def get_formula(self, key: str) -> str | None: ...

    def put_formula(self, key: str, text: str) -> None: ...


def formula_key(root: Node, positive: set[str]) -> str:
    """All a κ formula depends on: the expression (with the values of constants that have no exact text) and
    which inputs are positive."""
    inexact = [repr(n.value) for n in topological(root) if n.kind == CONST and not n.exact]
    return f"{root.key()}|{inexact}|{sorted(positive)}"


def kappa_formula(site: Site, cfg: Config, root: Node | None = None, store: FormulaStore | None = None
                  ) -> str | None:
    """The symbolic κ formula of a site's expression, or None when sympy cannot give it within the budget."""
    root = root or site.root
    positive = {k for k, r in site.ranges.items() if r.interval.low >= 0}
    key = formula_key(root, positive)
    hit = _FORMULAS.get(key)
    if hit is not None:
        return hit or None
    text = store.get_formula(key) if store is not None else None
    if text is None and len(topological(root)) <= 60:
        try:
            text = run_with_budget(kappa_formula_text, (root, positive), cfg.formula_budget)
        except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, ZeroDivisionError):
            text = None
        if text and store is not None:  # a formula that ran out of budget may come another time: not kept
            store.put_formula(key, text)
    _FORMULAS.put(key, text or _NO_FORMULA)
    return text


def _worst_per_range(findings: list[Finding]) -> list[Finding]:
    """One finding per flagged range and code: a function's own finding and the one its callers see through
    inlining (with their ranges) can fall on the same operation; the larger loss is kept."""
    best: dict[tuple[Span, str], Finding] = {}
    out: list[Finding] = []
    for f in findings:
        if f.code == NOT_ANALYSED.code:
            out.append(f)
            continue
        prev = best.get((f.span, f.code))
        if prev is None or (f.digits_lost or 0) > (prev.digits_lost or 0):
            best[(f.span, f.code)] = f
    return out + list(best.values())


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
