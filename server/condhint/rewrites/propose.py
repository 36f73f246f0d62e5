"""Verified fixes for one finding: targets, candidates, verification, code, and a last re-analysis.

For a finding the targets are the operation where digits are lost and the operations around it (up to
`ANCESTORS` levels up, within what can be replaced as one piece of text). Named rules are tried on every
target first; only when none gives a verified candidate does the general search run. Each candidate is
verified on the site's own samples (`verify.Bench.judge`); the survivors are written in the file's style,
and the best ones are checked once more by re-analysing the patched file: the loss must be gone and no
new finding may appear.
"""
from __future__ import annotations

import time
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable, Iterator

from condhint.config import Config
from condhint.expr import SELECT, Node, Span, topological
from condhint.findings import Finding, Fix
from condhint.numeric.analysis import Analysis
from condhint.numeric.array_analysis import has_reductions
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.rewrites import codegen, dag, search, sym
from condhint.rewrites.array_rules import array_fixes
from condhint.rewrites.context import Context
from condhint.rewrites.recheck import FIXABLE, rechecked
from condhint.rewrites.rules import RULES
from condhint.rewrites.scalar_view import scalar_view
from condhint.rewrites.wider import WIDER
from condhint.rewrites.verify import NOISE, Bench, Evidence
from condhint.rewrites.writer import Writer
from condhint.site import Site

if TYPE_CHECKING:
    from condhint.engine import ModuleAnalysis
    from condhint.reading.module_index import ModuleIndex

ANCESTORS = 4
SECONDS_PER_FINDING = 2.0


@dataclass
class Verified:
    rule: str
    title: str
    target: Node
    replacement: Node
    text: str
    imports: list[str]
    span: Span
    evidence: Evidence
    cost: int
    order: int
    note: str = ""

    def rank(self) -> tuple[float, int, int, int]:
        return (round(max(self.evidence.after, NOISE) * 2) / 2, self.cost, self.order, len(self.text))

    def fix(self) -> Fix:
        ev = self.evidence
        return Fix(title=self.title, replacement=self.text, span=self.span, imports=list(self.imports),
                   measured_digits_lost_after=ev.after, measured_digits_lost_before=ev.before, rule=self.rule,
                   proven=ev.proven, note=self.note)


def targets(site: Site, finding: Finding, culprit: Node | None, replaceable: Callable[[Node], bool]) -> list[Node]:
    """The flagged operation and the operations using it, nearest first."""
    nodes = topological(site.root)
    start = culprit if culprit is not None and culprit.span == finding.span else next(
        (n for n in reversed(nodes) if n.span == finding.span), None)
    if start is None:
        return []
    parents: dict[int, list[Node]] = {}
    for n in nodes:
        for a in n.args:
            parents.setdefault(id(a), []).append(n)
    out, frontier, seen = [], [start], {id(start)}
    for _ in range(ANCESTORS + 1):
        nxt: list[Node] = []
        for n in frontier:
            if replaceable(n):
                out.append(n)
            for p in parents.get(id(n), []):
                if id(p) not in seen and p.kind != SELECT:
                    seen.add(id(p))
                    nxt.append(p)
        frontier = nxt
    return out


@dataclass
class Proposal:
    rule: str
    title: str
    target: Node
    replacement: Node
    cost: int
    order: int
    approximate: bool = False
    note: str = ""


# What a rule, the search or the measurement may raise on an expression it cannot handle: that candidate
# is skipped, the others are still tried.
SKIPPED = (ArithmeticError, ValueError, TypeError, RecursionError, sym.Untranslatable, BudgetExceeded)


def _named(tgts: list[Node], ctx_for) -> Iterator[Proposal]:  # type: ignore[no-untyped-def]
    for t in tgts:
        ctx = ctx_for(t)
        for order, rule in enumerate((*RULES, WIDER)):
            try:
                cands = rule.candidates(t, ctx)
            except SKIPPED:
                continue
            for cand in cands:
                extra = 2 if any(n.kind == SELECT for n in topological(cand)) else 0
                yield Proposal(rule.id, rule.title, t, cand, rule.cost + extra, order)


def _searched(tgts: list[Node], ctx_for, deadline: Deadline) -> Iterator[Proposal]:  # type: ignore[no-untyped-def]
    base = len(RULES)
    for t in tgts:
        try:
            found_all = list(search.transformed(t, ctx_for(t), deadline))
        except SKIPPED:
            continue
        for k, found in enumerate(found_all):
            yield Proposal(found.rule, found.title, t, found.replacement, 3, base + k)
    for t in tgts:
        try:
            found_all = list(search.series(t, ctx_for(t), deadline))
        except SKIPPED:
            continue
        for found in found_all:
            yield Proposal(found.rule, found.title, t, found.replacement, 4, base + 10, True, found.note)


def _best_of_each_rule(ranked: list[Verified]) -> list[Verified]:
    """The best candidate of each rule on each target: a rule's other normal forms are no alternatives."""
    seen: set[tuple[str, int]] = set()
    out = []
    for v in ranked:
        if (v.rule, id(v.target)) not in seen:
            seen.add((v.rule, id(v.target)))
            out.append(v)
    return out


@dataclass(frozen=True)
class Subject:
    """What the rewrites are given about one finding: its site and analysis, the module index it was read
    from (with the module constants its nodes share), and a way to analyse a patched text again."""

    finding: Finding
    site: Site
    analysis: Analysis | None
    index: "ModuleIndex"
    constants: dict[str, Node]
    reanalyse: Callable[[str], "ModuleAnalysis"]


def fixes_for(subject: Subject, cfg: Config, seconds: float = SECONDS_PER_FINDING) -> list[Fix]:
    """Verified fixes for one finding, best first (empty when none is verified)."""
    finding, site, analysis = subject.finding, subject.site, subject.analysis
    if finding.category not in FIXABLE:
        return []
    if analysis is not None and analysis.category == "domain-range":
        return []  # the declared range itself leaves the domain: no rewrite changes that
    nodes = topological(site.root)
    culprit = nodes[analysis.culprit] if analysis is not None and analysis.culprit is not None else None
    if has_reductions(nodes):
        fixes = array_fixes(subject, cfg)  # array code: its own rules first
        view = None if fixes else scalar_view(site, cfg)
        if view is None:
            return fixes
        # then the scalar rules and the search, on the elementwise formulas of the reductions' results
        site, mapped = view
        nodes = topological(site.root)
        inside = {id(n) for n in nodes}
        culprit = mapped.get(id(culprit)) if culprit is not None else None
        culprit = culprit if culprit is not None and id(culprit) in inside else None  # not within a reduction
    deadline = Deadline(seconds)
    source = subject.index.source

    def replaceable(n: Node) -> bool:
        return n.span is not None and bool(n.text) and source.segment(n.span) == n.text and \
            codegen.is_expression(n.text, bracketed=True)

    tgts = targets(site, finding, culprit, replaceable)
    if not tgts:
        return []
    try:
        bench = Bench(site, cfg, finding.worst_at)
    except SKIPPED:
        return []
    writers: dict[int, Writer] = {}
    contexts: dict[int, Context] = {}

    def writer(t: Node) -> Writer:
        if id(t) not in writers:
            writers[id(t)] = Writer(subject.index, subject.constants, site, t)
        return writers[id(t)]

    def ctx_for(t: Node) -> Context:
        if id(t) not in contexts:
            contexts[id(t)] = Context(bench, set(writer(t).names))
        return contexts[id(t)]

    seen: set[tuple[int, str]] = set()
    kept = {id(n) for n in nodes}
    for stage in (lambda: _named(tgts, ctx_for), lambda: _searched(tgts, ctx_for, deadline)):
        verified: list[Verified] = []
        for p in stage():
            if deadline.at is not None and time.perf_counter() > deadline.at:
                break
            replacement = dag.typed(p.replacement, kept)  # in the format the code would compute it in
            try:
                text, imports, span = writer(p.target).write(replacement)
            except (codegen.Unspellable, SyntaxError, ValueError, RecursionError):
                continue
            if (id(p.target), text) in seen or text == p.target.text:
                continue
            seen.add((id(p.target), text))
            if writer(p.target).evaluates_both_branches and not bench.branches_finite(replacement):
                continue  # `np.where` would compute a branch that overflows or divides by zero
            cand_root = dag.substitute(site.root, p.target, replacement)
            try:
                ev = bench.judge(p.target, replacement, cand_root, p.approximate, deadline)
            except SKIPPED:
                continue
            if ev.ok:
                title = p.title.replace("{text}", text if len(text) <= 50 else text[:47] + "…")
                verified.append(Verified(p.rule, title, p.target, replacement, text, imports, span, ev,
                                         p.cost, p.order, p.note))
        verified.sort(key=Verified.rank)
        verified = _best_of_each_rule(verified)
        fixes = rechecked([v.fix() for v in verified], finding, subject.index, subject.reanalyse)
        if fixes:
            return fixes
    return []
