"""What an editor shows when the cursor rests on a numeric expression: plain data and Markdown from the core.

`describe(site, node, analysis, cfg, ...)` gathers the figures of one (sub)expression; `markdown(...)` writes
them for a hover. Mathematics goes in code spans, so every client renders it the same way.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

from condhint.config import Config
from condhint.engine import DEFAULT_CACHE, AnalysisCache
from condhint.expr import Node, topological
from condhint.findings import Finding
from condhint.messages import counted_in, num, pct
from condhint.numeric.formats import format_named
from condhint.numeric.analysis import Analysis
from condhint.numeric.evaluate import Deadline
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.site_analysis import analyse_site_values
from condhint.site import Site

_SOURCES = {
    "comment": "a condhint comment",
    "assert": "an assert",
    "guard": "a guard (`if …: raise/return`)",
    "branch": "the enclosing branch",
    "range": "the enclosing `for … in range(…)`",
    "parameter default": "the scale of the parameter's default value (two decades either side)",
    "docstring": "the function's docstring",
    "default": "an assumed range (the default: declare the real one with a `# condhint:` comment)",
}


@dataclass
class InputFacts:
    name: str
    low: float
    high: float
    source: str  # as the analysis names it: "comment", "assert+guard", "default", …
    line: int | None
    kappa: float | None
    uncertainty: str | None  # declared, as the user wrote it ("1%", "0.02")


@dataclass
class HoverFacts:
    """The figures of one expression over its input ranges (all estimates over samples)."""

    text: str
    kappa: float
    kappa_median: float
    kappa_at: dict[str, float]
    predicted: float
    measured: float | None
    total_digits: float
    samples: int
    limiting: str | None  # which operation limits accuracy, in words
    limiting_line: int | None
    inputs: list[InputFacts] = field(default_factory=list)
    result_uncertainty: float | None = None
    finding: Finding | None = None
    finding_around: bool = False  # the finding is on an enclosing operation, not on this expression
    formula: str | None = None
    format: str = "binary64"  # the format the expression's result computes in (a `numeric.formats` name)
    formula_state: str = "off"  # "ready", "pending", "unavailable", "off"
    asked: int = 0  # the samples the settings ask for (the ranges' corners are added, guarded points dropped)


def _label(node: Node) -> str:
    fn = OPERATIONS.get(node.kind)
    return fn.label if fn else node.kind


def describe(site: Site, node: Node, analysis: Analysis, cfg: Config, finding: Finding | None = None
             ) -> HoverFacts:
    """Figures for `node` (the site's root or a subexpression) analysed over the site's ranges."""
    nodes = topological(node)
    limiting, limiting_line = None, None
    if analysis.culprit is not None and analysis.culprit < len(nodes):
        c = nodes[analysis.culprit]
        limiting = f"{_label(c)} `{' '.join(c.text.split())}`" if c.text else _label(c)
        limiting_line = c.span.line if c.span else None
    inputs = []
    for name in analysis.names:
        lo, hi = analysis.bounds[name]
        r = site.ranges.get(name)
        unc = None
        if r is not None and r.uncertainty is not None:
            unc = f"{100 * r.uncertainty:g}%"
        elif r is not None and r.uncertainty_abs is not None:
            unc = f"{r.uncertainty_abs:g}"
        inputs.append(InputFacts(name, lo, hi, analysis.sources.get(name, "default"),
                                 r.line if r is not None else None, analysis.kappa_i.get(name), unc))
    return HoverFacts(
        text=" ".join(node.text.split()), kappa=analysis.kappa, kappa_median=analysis.kappa_median,
        kappa_at=analysis.kappa_at, predicted=analysis.predicted, measured=analysis.measured,
        total_digits=node.format.digits, format=node.format.name, samples=analysis.n_samples, asked=cfg.samples,
        limiting=limiting,
        limiting_line=limiting_line, inputs=inputs, result_uncertainty=analysis.result_uncertainty,
        finding=finding)


def source_words(source: str) -> str:
    """'comment+guard' -> 'a condhint comment, narrowed by a guard (…)'."""
    parts = [_SOURCES.get(p, p) for p in dict.fromkeys(source.split("+"))]  # "assert+assert": one assert
    return parts[0] + "".join(f", narrowed by {p}" for p in parts[1:])


def _code(text: str, limit: int = 80) -> str:
    text = text if len(text) <= limit else text[: limit - 1] + "…"
    return f"`{text}`"


def _at(at: dict[str, float]) -> str:
    return ", ".join(f"{k} ≈ {num(v, 3)}" for k, v in at.items())


def _digits(x: float | None) -> str:
    return "n/a" if x is None or (isinstance(x, float) and math.isnan(x)) else f"{x:.1f}"


def markdown(facts: HoverFacts) -> str:
    """The hover text: κ, per-input κᵢ, digits lost, the limiting operation, ranges and a caution."""
    out = [f"**condhint** {_code(facts.text)}", ""]
    f = facts.finding
    if f is not None:
        head = f"**{f.code} {f.name}** ({f.category}, {f.severity}): {_digits(f.digits_lost)} digits lost"
        if facts.finding_around:
            head = f"inside {_code(' '.join(f.expression.split()))}, flagged {head}"
        out += [head, ""]
    where = f" at `{_at(facts.kappa_at)}`" if facts.kappa_at else ""
    kappa = "n/a (no finite samples)" if math.isnan(facts.kappa) else f"`κ ≈ {num(facts.kappa)}`"
    median = "" if math.isnan(facts.kappa_median) else f" (median `{num(facts.kappa_median)}`)"
    out.append(f"- condition number: {kappa} worst over the range{where}{median}")
    per = [f"`κ_{i.name} ≈ {num(i.kappa)}`" for i in facts.inputs if i.kappa is not None]
    if per:
        out.append(f"- per input: {', '.join(per)}")
    measured = (f"{_digits(facts.measured)} measured against mpmath, " if facts.measured is not None
                else "not measured (binary64 screening found nothing to check), ")
    out.append(f"- digits lost to rounding: {measured}{_digits(facts.predicted)} predicted "
               f"(of {counted_in(format_named(facts.format))})")
    if facts.limiting:
        line = f" (line {facts.limiting_line})" if facts.limiting_line else ""
        out.append(f"- accuracy is limited by {facts.limiting}{line}")
    else:
        out.append("- no single operation stands out as losing digits")
    declared = [i for i in facts.inputs if i.uncertainty]
    if declared:
        ins = ", ".join(f"`{i.name} ± {i.uncertainty}`" for i in declared)
        res = f"`± {pct(facts.result_uncertainty)}`" if facts.result_uncertainty is not None else "n/a"
        out.append(f"- declared uncertainty {ins} → result uncertain by {res} (first order, worst case)")
    if facts.inputs:
        out.append("- ranges:")
        for i in facts.inputs:
            line = f", line {i.line}" if i.line and not i.source.startswith("default") else ""
            out.append(f"  - `{i.name} ∈ [{num(i.low, 3)}, {num(i.high, 3)}]` from {source_words(i.source)}{line}")
    if facts.formula_state == "ready" and facts.formula:
        out.append(f"- κ formula: {_code(facts.formula, 400)}")
    elif facts.formula_state == "pending":
        out.append("- κ formula: being derived in the background (hover again)")
    elif facts.formula_state == "unavailable":
        out.append("- κ formula: not available (sympy gave none within the time budget, or it is too long to read)")
    how = "" if facts.samples == facts.asked or not facts.asked else (
        f" ({facts.asked} asked for, with the ranges' corners, less points the guards exclude)")
    out += ["", f"_Estimates over {facts.samples} sampled inputs{how}, not guarantees._"]
    return "\n".join(out)


def analyse_node(site: Site, node: Node, cfg: Config, cache: AnalysisCache | None = DEFAULT_CACHE) -> Analysis:
    """The analysis of a subexpression over its site's ranges, shared through the engine's cache (the key
    is the subexpression's structure with the site's ranges, exactly as for a site of its own)."""
    key = AnalysisCache.key(site, cfg, node.key()) if cache is not None else ""
    hit = cache.get(key) if cache is not None else None
    if hit is not None:
        return hit
    result = analyse_site_values(site, cfg, root=node, deadline=Deadline(cfg.site_budget))
    if cache is not None:
        cache.put(key, result)
    return result


def warm_up() -> bool:
    """Run in the formula worker process once, so that importing sympy is not charged to a formula's budget."""
    import condhint.symbolic  # noqa: F401

    return True
