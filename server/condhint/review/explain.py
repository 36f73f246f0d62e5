"""`condhint explain`: everything condhint knows about one expression, for a reader.

The expression at a position is analysed as `check` does; then κ's formula (sympy, under a time budget), a
table of κ and digits lost (predicted and measured) across the range of one input, the operations whose
rounding is magnified most, and candidate fixes, each measured at the same points by analysing the code as it
would read after the fix.
"""
from __future__ import annotations

import math
import shlex
from dataclasses import dataclass, field, replace
from typing import Any, Callable

import numpy as np

from condhint.config import Config
from condhint.engine import ModuleAnalysis, analyse_module
from condhint.expr import Span, topological
from condhint.findings import Finding, Fix
from condhint.messages import num
from condhint.numeric.analysis import Analysis, analyse
from condhint.numeric.array_analysis import has_reductions
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.numeric.formats import BINARY64
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.inputs import keep_where_guards_hold
from condhint.review.profile import Profile, input_names, profile, swept_input, sweep
from condhint.site import Site

TABLE_ROWS = 12
CURVE_POINTS = 121


class NothingThere(Exception):
    """No analysed floating-point expression at the position."""


@dataclass
class Contribution:
    text: str
    span: Span | None
    amplification: float  # |v ∂f/∂v / f| of this operation's rounding at the worst point
    label: str

    @property
    def digits(self) -> float:
        return math.log10(self.amplification) if self.amplification > 1 else 0.0


@dataclass
class Candidate:
    fix: Fix
    origin: str  # "rewrite search" or "--try"
    profile: Profile | None = None
    note: str = ""

    @property
    def worst(self) -> float | None:
        if self.profile is None or not np.isfinite(self.profile.measured).any():
            return None
        return float(np.nanmax(self.profile.measured))


@dataclass
class Explanation:
    path: str
    site: Site
    analysis: Analysis
    finding: Finding | None
    kappa_formula: str | None
    formula_note: str
    swept: str | None
    held: dict[str, float]
    curve: Profile
    contributions: list[Contribution] = field(default_factory=list)
    candidates: list[Candidate] = field(default_factory=list)
    total_digits: float = BINARY64.digits
    # (cell, line within the cell) of a line of the analysed text: notebooks are analysed as joined cells.
    cell_line: Callable[[int], tuple[int | None, int]] = lambda line: (None, line)

    def line_label(self, line: int) -> str:
        """A line as the user writes it: LINE, or CELL:LINE in a notebook."""
        cell, ln = self.cell_line(line)
        return str(ln) if cell is None else f"{cell}:{ln}"


def locate(ma: ModuleAnalysis, line: int, col: int | None) -> tuple[Site, Finding | None]:
    """The site at a position: one whose finding covers it first, else the smallest site containing it."""
    def covers(span: Span) -> bool:
        if col is None:
            return span.line <= line <= span.end_line
        return (span.line, span.col) <= (line, col) <= (span.end_line, span.end_col)

    findings = [f for f in [*ma.report.findings, *ma.report.suppressed] if ma.site_of(f) is not None]
    hits = [f for f in findings if covers(f.span)]
    if hits:
        f = max(hits, key=lambda f: (f.digits_lost or 0))
        return ma.site_of(f), f  # type: ignore[return-value]
    sites = [s for s in ma.sites if covers(s.span)]
    if not sites:
        where = f"line {line}" + ("" if col is None else f", column {col + 1}")
        raise NothingThere(f"no floating-point expression condhint analyses at {where}")
    site = min(sites, key=lambda s: ((s.span.end_line - s.span.line) * 10_000 + s.span.end_col - s.span.col))
    owner = next((f for f in findings if ma.site_of(f) is site), None)
    return site, owner


def _formula(site: Site, a: Analysis, cfg: Config, finding: Finding | None) -> tuple[str | None, str]:
    if finding is not None and finding.kappa_formula:
        return finding.kappa_formula, ""
    from condhint.budget import OverBudget, run_with_budget
    from condhint.symbolic import kappa_formula_text

    positive = {k for k, (lo, _) in a.bounds.items() if lo > 0}
    try:
        return run_with_budget(kappa_formula_text, (site.root, positive), cfg.formula_budget), ""
    except OverBudget:
        return None, f"not simplified within the budget of {cfg.formula_budget:g} s (formula_budget)"
    except (ValueError, TypeError, RuntimeError, RecursionError) as exc:
        return None, f"no symbolic form: {exc}"


def _label(node: Any) -> str:
    fn = OPERATIONS.get(node.kind)
    return fn.label if fn else node.kind


def contributions(p: Profile, at: int, limit: int = 5) -> list[Contribution]:
    """Rounding operations ranked by how much their error is magnified in the result at point `at`."""
    ranked = []
    for k, term in p.terms.items():
        v = float(np.nan_to_num(term[at], nan=0.0, posinf=1e300))
        node = p.nodes[k]
        ranked.append(Contribution(node.text or str(node.exact or node.kind), node.span, v, _label(node)))
    ranked.sort(key=lambda c: -c.amplification)
    return ranked[:limit]


def apply_fix(text: str, fix: Fix) -> tuple[str, int, int]:
    """The text after the fix: (new text, lines added above it by imports, lines the replacement adds).

    The rewrites package applies fixes (and their imports) where it is installed; a `--try` formula, which
    needs no imports, is spliced in directly otherwise.
    """
    from condhint.reading.source import Source

    s = fix.span
    grown = fix.replacement.count("\n") - (s.end_line - s.line)
    try:
        from condhint.rewrites import apply_fixes
    except ImportError:
        apply_fixes = None
    if apply_fixes is not None:
        new = apply_fixes(text, [fix])
    else:
        if fix.imports:
            raise ValueError("applying a fix with imports needs the rewrites package")
        lines = Source(text).lines
        head, tail = lines[s.line - 1][: s.col], lines[s.end_line - 1][s.end_col:]
        lines[s.line - 1: s.end_line] = (head + fix.replacement + tail).split("\n")
        new = "\n".join(lines)
    shift = len(Source(new).lines) - len(Source(text).lines) - grown  # imports go above the code
    return new, shift, grown


def _fixed_site(ma: ModuleAnalysis, site: Site, fix: Fix, shift: int, grown: int) -> Site | None:
    line = site.span.line + shift + (grown if site.span.line > fix.span.end_line else 0)
    same = [s for s in ma.sites if s.scope == site.scope]
    exact = [s for s in same if (s.span.line, s.span.col) == (line, site.span.col)]
    if exact:
        return max(exact, key=lambda s: (s.span.end_line, s.span.end_col))
    stmt = site.statement_line + shift + (grown if site.statement_line > fix.span.end_line else 0)
    near = [s for s in same if s.statement_line == stmt]
    return max(near, key=lambda s: (s.span.end_line - s.span.line, s.span.end_col - s.span.col)) if near else None


def measure_fix(text: str, path: str, cfg: Config, site: Site, cand: Candidate, points: dict[str, np.ndarray]
                ) -> None:
    """Analyse the code as it reads after the fix and measure the fixed expression at the same points."""
    try:
        new_text, shift, grown = apply_fix(text, cand.fix)
    except ValueError as exc:
        cand.note = str(exc)
        return
    ma = analyse_module(new_text, path, cfg, cache=None)
    if ma.report.status != "ok":
        cand.note = "the fixed code does not parse"
        return
    new = _fixed_site(ma, site, cand.fix, shift, grown)
    if new is None:
        cand.note = "the fixed code has no analysable expression there"
        return
    missing = set(input_names(new.root)) - set(points)
    if missing:
        cand.note = f"the fixed expression has inputs the original has not: {', '.join(sorted(missing))}"
        return
    try:
        cand.profile = profile(new.root, points, cfg)
    except BudgetExceeded:
        cand.note = "not measured within the time budget"


def rewrite_candidates(finding: Finding | None, ma: ModuleAnalysis, cfg: Config) -> tuple[list[Fix], str]:
    """Verified fixes from the rewrite search, when that package is installed."""
    if finding is None:
        return [], ""
    from condhint.fixing import fixes_for, rewrites

    if rewrites() is None:
        return [], "the rewrite search is not available in this installation"
    return fixes_for(finding, ma, cfg), ""


def explain(text: str, path: str, line: int, col: int | None, cfg: Config, tries: tuple[str, ...] = (),
            fixes: list[Fix] | None = None, curve_points: int = CURVE_POINTS) -> tuple[Explanation, str]:
    """The explanation of the expression at (line, 0-based col); returns it and a note on fixes."""
    cfg = replace(cfg, min_severity="info")
    ma = analyse_module(text, path, cfg)
    if ma.report.status != "ok":
        raise NothingThere(ma.report.message or "the file could not be analysed")
    site, finding = locate(ma, line, col)
    if has_reductions(topological(site.root)):  # arrays (issue 14): no one-input sweep describes them yet
        raise NothingThere("array code (reductions) is not explained yet; `check --format json` and hover give "
                           "its figures")
    a = analyse(site, cfg, deadline=Deadline(cfg.site_budget * 4), keep_points=True)
    formula, formula_note = _formula(site, a, cfg, finding)
    names = input_names(site.root)
    worst = a.worst_at or a.kappa_at or {k: a.bounds[k][0] for k in names}
    swept = swept_input(names, a.bounds)
    is_int = {k for k, r in site.ranges.items() if r.is_int}
    pts = keep_where_guards_hold(site, sweep(names, a.bounds, worst, swept, curve_points, is_int))
    curve = profile(site.root, pts, cfg)
    meas = np.nan_to_num(curve.measured, nan=-1.0)
    at = int(np.argmax(meas)) if curve.n else 0
    note = ""
    if fixes is None:
        fixes, note = rewrite_candidates(finding, ma, cfg)
    cands = [Candidate(f, "rewrite search") for f in fixes] + [Candidate(try_fix(site, t), "--try") for t in tries]
    for c in cands:
        measure_fix(text, path, cfg, site, c, curve.cols)
    expl = Explanation(path, site, a, finding, formula, formula_note, swept,
                       {k: v for k, v in worst.items() if k != swept}, curve, contributions(curve, at), cands,
                       site.float_format.digits)
    return expl, note


def try_fix(site: Site, expression: str) -> Fix:
    """A user's own formula for the whole expression (`--try`), parsed (never evaluated) later."""
    return Fix(title=f"your formula `{expression}`", replacement=expression, span=site.span, rule="user")


def how_to_apply(e: Explanation) -> dict[str, str] | None:
    """How to apply the best verified fix of the finding (the one `fix` would apply): the command and the
    quick-fix title editors show. None without one, for a suppressed finding, or in a notebook (`fix` rewrites
    .py files only)."""
    from condhint.fixing import quick_fix_title

    f = e.finding
    best = next((c.fix for c in e.candidates if c.origin == "rewrite search"), None)
    if f is None or best is None or f.suppressed or e.cell_line(f.span.line)[0] is not None:
        return None
    return {"command": f"condhint fix {shlex.quote(f'{e.path}:{f.span.line}:{f.span.col + 1}')}",
            "quick_fix": quick_fix_title(best, f)}


def table_rows(p: Profile, rows: int = TABLE_ROWS) -> list[int]:
    """Indices of about `rows` points spread evenly over the curve, endpoints and the worst point included."""
    if p.n <= rows:
        return list(range(p.n))
    picks = set(np.linspace(0, p.n - 1, rows - 1).round().astype(int).tolist())
    if np.isfinite(p.measured).any():
        picks.add(int(np.nanargmax(p.measured)))
    return sorted(picks)


def render(e: Explanation, note: str = "") -> str:
    """The explanation as text for a terminal."""
    s, a, f = e.site, e.analysis, e.finding
    total = e.total_digits
    out = [f"{e.path}:{e.line_label(s.span.line)}:{s.span.col + 1}  in {s.scope or 'module level'}",
           f"    {' '.join(s.root.text.split())}", ""]
    if f is not None:
        out += [f"finding {f.code} {f.name} ({f.severity}{', suppressed' if f.suppressed else ''}) at "
                f"{e.line_label(f.span.line)}:{f.span.col + 1} `{' '.join(f.expression.split())}`", f"    {f.message}", ""]
    else:
        out += ["no finding here: the expression is accurate enough on its range", ""]
    out.append("inputs")
    for k in a.names:
        lo, hi = a.bounds[k]
        src = a.sources.get(k, "default")
        unc = s.ranges[k].uncertainty if k in s.ranges else None
        out.append(f"    {k:<12} [{num(lo, 3)}, {num(hi, 3)}]  from {src}"
                   + (f", known to ±{100 * unc:g}%" if unc else ""))
    out += ["", "condition number (input sensitivity, κ = Σ |xᵢ ∂f/∂xᵢ| / |f|)"]
    out.append(f"    κ = {e.kappa_formula}" if e.kappa_formula else f"    formula: {e.formula_note}")
    out.append(f"    worst κ ≈ {num(a.kappa)} (≈ {math.log10(max(a.kappa, 1)):.1f} digits at risk from input errors)"
               if a.kappa == a.kappa else "    κ: undefined on the range")
    p = e.curve
    if e.swept is not None:
        held = ", ".join(f"{k} = {num(v, 3)}" for k, v in e.held.items())
        out += ["", f"across the range of {e.swept}" + (f" (other inputs at the worst case: {held})" if held else ""),
                f"    {e.swept:>12} {'κ':>10} {'predicted':>10} {'measured':>10}   digits lost of {total:.0f}"]
        for i in table_rows(p):
            out.append(f"    {num(float(p.cols[e.swept][i]), 3):>12} {num(float(p.kappa[i])):>10} "
                       f"{_d(p.predicted[i]):>10} {_d(p.measured[i]):>10}")
    if e.contributions:
        worst = int(np.nanargmax(np.nan_to_num(p.measured, nan=-1.0))) if p.n else 0
        at = ", ".join(f"{k} = {num(float(v[worst]), 3)}" for k, v in p.cols.items())
        out += ["", f"where rounding is magnified (at {at}; u = {cfg_u(total)})"]
        if e.finding is not None:  # the same operation the finding names, then whose rounding it magnifies
            out.append(f"    the finding's operation: `{' '.join(e.finding.expression.split())}` at "
                       f"{e.line_label(e.finding.span.line)}:{e.finding.span.col + 1}; the rounding it magnifies:")
        for i, c in enumerate(e.contributions, 1):
            where = f"{e.line_label(c.span.line)}:{c.span.col + 1}" if c.span else "-"
            out.append(f"    {i}. {c.label:<14} `{' '.join(c.text.split())}` at {where}: error ×{num(c.amplification)}"
                       f" ({c.digits:.1f} digits)")
    out += ["", "candidate fixes"]
    if not e.candidates:
        out.append(f"    none{': ' + note if note else ''}")
    for i, c in enumerate(e.candidates, 1):
        out.append(f"    {i}. {c.fix.title}  ({c.origin})")
        out.append(f"       {c.fix.replacement}")
        if c.fix.imports:
            out.append(f"       adds: {'; '.join(c.fix.imports)}")
        if c.worst is not None:
            before = _worst(p)
            out.append(f"       measured here: worst {c.worst:.1f} digits lost (as written: {before:.1f})"
                       + (f"; the rewrite search measured {c.fix.measured_digits_lost_after:.1f}"
                          if c.origin == "rewrite search" else ""))
        elif c.note:
            out.append(f"       not measured: {c.note}")
        if c.fix.proven:
            out.append("       equivalence proven symbolically")
    out += ["", "Figures are estimates at sampled inputs (mpmath reference), not proofs."]
    hint = how_to_apply(e)
    if hint is not None:
        out += ["", "to apply the best verified fix", f"    {hint['command']}",
                f"    in an editor, the quick fix “{hint['quick_fix']}”"]
    return "\n".join(out) + "\n"


def _d(x: float) -> str:
    return "n/a" if x != x else f"{x:.1f}"


def _worst(p: Profile) -> float:
    return float(np.nanmax(p.measured)) if np.isfinite(p.measured).any() else math.nan


def cfg_u(total: float) -> str:
    return f"2^-{round(total / math.log10(2))}"


def as_dict(e: Explanation, note: str = "") -> dict[str, Any]:
    """The explanation as JSON-ready data."""
    p = e.curve
    finding = e.finding.to_dict() if e.finding else None
    if e.finding is not None and finding is not None:
        cell, finding["line"] = e.cell_line(e.finding.span.line)
        finding["end_line"] = e.cell_line(e.finding.span.end_line)[1]
        if cell is not None:
            finding["cell"] = cell

    def floats(xs: np.ndarray) -> list[float | None]:
        return [None if not math.isfinite(float(x)) else round(float(x), 4) for x in xs]

    return {
        "path": e.path, "cell": e.cell_line(e.site.span.line)[0], "line": e.cell_line(e.site.span.line)[1], "column": e.site.span.col + 1, "scope": e.site.scope,
        "expression": e.site.root.text, "finding": finding,
        "inputs": {k: {"low": e.analysis.bounds[k][0], "high": e.analysis.bounds[k][1],
                       "source": e.analysis.sources.get(k)} for k in e.analysis.names},
        "kappa_formula": e.kappa_formula, "kappa_formula_note": e.formula_note or None,
        "swept": e.swept, "held": e.held,
        "points": {"inputs": {k: [float(x) for x in v] for k, v in p.cols.items()}, "kappa": floats(p.kappa),
                   "predicted": floats(p.predicted), "measured": floats(p.measured)},
        "contributions": [{"expression": c.text, "operation": c.label, "line": e.cell_line(c.span.line)[1] if c.span else None,
                           "amplification": c.amplification, "digits": round(c.digits, 2)}
                          for c in e.contributions],
        "fixes": [{"title": c.fix.title, "replacement": c.fix.replacement, "origin": c.origin,
                   "worst_measured": None if c.worst is None else round(c.worst, 2), "note": c.note or None,
                   "measured": floats(c.profile.measured) if c.profile else None} for c in e.candidates],
        "fixes_note": note or None,
        "apply": how_to_apply(e),
    }
