"""Code actions: verified rewrites (quick fixes and fix-all), a range comment, an ignore comment.

Each action is planned first (title, kind, the findings it addresses) with its text edits computed by a
function, so that clients with `codeAction/resolve` get the edits only when they pick an action and
clients without it (eglot 1.9) get them at once.
"""
from __future__ import annotations

import ast
import re
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Callable

from condhint.expr import Span
from condhint.findings import Finding, Fix
from condhint.engine import ModuleAnalysis
from condhint.fixing import quick_fix_title, rewrites
from condhint.lsp.textedits import LineFacts, Replacement, add_clause, comment_line_before, diff
from condhint.messages import num
from condhint.reading.comments import PLACEHOLDERS
from condhint.site import Site

QUICKFIX = "quickfix"
REFACTOR = "refactor.rewrite"
FIX_ALL = "source.fixAll.condhint"
KINDS = (QUICKFIX, REFACTOR, FIX_ALL)
_DECLARABLE = re.compile(r"^[A-Za-z_]\w*(?:\.[A-Za-z_]\w*)*$")


@dataclass
class Plan:
    id: str
    title: str
    kind: str
    findings: list[Finding]
    edits: Callable[[], list[Replacement]] = field(repr=False)
    preferred: bool = False


def wanted(kind: str, only: list[str] | None) -> bool:
    return not only or any(kind == o or kind.startswith(o + ".") for o in only)


def overlaps(span: Span, start: tuple[int, int], end: tuple[int, int]) -> bool:
    return (span.line, span.col) <= end and start <= (span.end_line, span.end_col)


# ---- rewrites -------------------------------------------------------------------------------------------------
def _applied(text: str, fixes: list[Fix]) -> Callable[[], list[Replacement]]:
    def edits() -> list[Replacement]:
        engine = rewrites()
        if engine is None:
            return []
        return diff(text, engine.apply_fixes(text, fixes))

    return edits


def fix_plans(text: str, finding: Finding, fixes: list[Fix]) -> list[Plan]:
    return [Plan(f"fix:{finding.fingerprint()}:{i}", quick_fix_title(fix, finding), QUICKFIX, [finding],
                 _applied(text, [fix]), preferred=(i == 0)) for i, fix in enumerate(fixes)]


def fix_all_plan(text: str, chosen: list[tuple[Finding, Fix]], pending: int = 0) -> Plan | None:
    """One action applying the best fix of every finding (skipping fixes that overlap an earlier one); its title
    says how many searches are still running (those fixes are not in it: ask again to include them)."""
    picked: list[tuple[Finding, Fix]] = []
    for f, fix in sorted(chosen, key=lambda p: (p[1].span.line, p[1].span.col)):
        if picked and not (picked[-1][1].span.end_line, picked[-1][1].span.end_col) <= (fix.span.line, fix.span.col):
            continue
        picked.append((f, fix))
    if not picked:
        return None
    n = len(picked)
    more = f" ({pending} still searching)" if pending else ""
    return Plan("fixall", f"Apply {n} verified condhint rewrite{'s' if n != 1 else ''}{more}", FIX_ALL,
                [f for f, _ in picked], _applied(text, [fix for _, fix in picked]))


# ---- comments -------------------------------------------------------------------------------------------------
def ignore_plan(lines: list[str], facts: LineFacts, finding: Finding) -> Plan | None:
    if finding.code == "CH001":
        return None
    clause = f"ignore[{finding.code}]"
    for line in dict.fromkeys((finding.span.end_line, finding.span.line)):
        edit = add_clause(lines, facts, line, clause)
        if edit is not None:
            return Plan(f"ignore:{finding.fingerprint()}", f"Ignore {finding.code} {finding.name} on this line "
                        f"(# condhint: {clause})", QUICKFIX, [finding], lambda e=edit: [e])
    return None


@lru_cache(maxsize=256)
def _defs(text: str) -> tuple[tuple[int, int, int, int], ...]:
    """(def line, end line, first body line, body on the def line) of every function in a text."""
    try:
        tree = ast.parse(text)
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return ()
    out = []
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and node.body:
            first = node.body[0].lineno
            out.append((node.lineno, node.end_lineno or node.lineno, first, int(first == node.lineno)))
    return tuple(out)


def default_inputs(names: list[str], bounds: dict[str, tuple[float, float]], sources: dict[str, str]
                   ) -> dict[str, tuple[float, float]]:
    """Inputs analysed on the default range that a comment can name."""
    return {n: bounds[n] for n in names if sources.get(n, "default") == "default" and _DECLARABLE.match(n)}


def range_plan(lines: list[str], facts: LineFacts, text: str, site: Site,
               inputs: dict[str, tuple[float, float]], findings: list[Finding]) -> Plan | None:
    """Insert `# condhint: low <= x <= high` for inputs sampled on the default range (on the def line, or as
    the function's first line when the def line has another comment; above the statement at module level).
    The bounds are placeholders the user fills in (tab stops where the client takes snippet edits): the guessed
    range is never written down as if the user had chosen it, and an unfilled one reads as CH001."""
    if not inputs:
        return None
    clause = ", ".join(f"{PLACEHOLDERS[0]} <= {name} <= {PLACEHOLDERS[1]}" for name in inputs)
    snippet = ", ".join(f"${{{2 * i + 1}:{PLACEHOLDERS[0]}}} <= {name} <= ${{{2 * i + 2}:{PLACEHOLDERS[1]}}}"
                        for i, name in enumerate(inputs))
    line = site.statement_line
    enclosing = [d for d in _defs(text) if d[0] <= line <= d[1]]
    edit: Replacement | None
    if enclosing:
        def_line, _, body_line, same = max(enclosing, key=lambda d: d[0])
        edit = add_clause(lines, facts, def_line, clause, snippet)
        if edit is None and not same:
            edit = comment_line_before(lines, body_line, clause, snippet)
    else:
        edit = comment_line_before(lines, line, clause, snippet)
    if edit is None:
        return None
    names = ", ".join(inputs)
    lo, hi = next(iter(inputs.values()))
    kind = QUICKFIX if findings else REFACTOR
    return Plan(f"range:{site.scope}:{names}",
                f"Declare the range of {names} (sampled now on the assumed [{num(lo, 3)}, {num(hi, 3)}])",
                kind, findings, lambda: [edit])


# ---- all actions for a range ------------------------------------------------------------------------------------
def findings_in(result: ModuleAnalysis, start: tuple[int, int], end: tuple[int, int],
                fingerprints: set[str]) -> list[Finding]:
    return [f for f in result.findings if overlaps(f.span, start, end) or f.fingerprint() in fingerprints]


def comment_plans(lines: list[str], result: ModuleAnalysis, findings: list[Finding],
                  start: tuple[int, int]) -> list[Plan]:
    """Ignore actions for the findings, and range-comment actions for their sites (or the expression at the
    cursor) when those were analysed on the default range."""
    facts = LineFacts.of("\n".join(lines))
    plans: list[Plan] = []
    ranged: dict[int, tuple[Site, list[Finding], dict[str, tuple[float, float]]]] = {}
    for f in findings:
        p = ignore_plan(lines, facts, f)
        if p is not None:
            plans.append(p)
        site = result.site_of(f)
        if site is None:
            continue
        names = list(f.inputs)
        inputs = default_inputs(names, {k: (v.low, v.high) for k, v in f.inputs.items()},
                                {k: v.source for k, v in f.inputs.items()})
        entry = ranged.setdefault(id(site), (site, [], inputs))
        entry[1].append(f)
    if not ranged:
        hit = result.node_at(*start)
        if hit is not None:
            site, _ = hit
            a = result.analysis_of(site)
            if a is not None:
                ranged[id(site)] = (site, [], default_inputs(a.names, a.bounds, a.sources))
    text = result.index.text if result.index is not None else ""
    for site, fs, inputs in ranged.values():
        p = range_plan(lines, facts, text, site, inputs, fs)
        if p is not None and all(q.id != p.id for q in plans):
            plans.append(p)
    return plans
