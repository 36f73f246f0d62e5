"""A site's analysis -> its finding (or none), placed on the operation that causes it."""
from __future__ import annotations

import math
from dataclasses import replace

from condhint.config import Config
from condhint.expr import CONST, INPUT, Span, topological
from condhint.findings import Finding, InputInfo
from condhint.kinds import BY_CATEGORY, NOT_ANALYSED, only_at_assumed_extremes
from condhint.messages import Facts, declare_note, kappa_explains
from condhint.numeric.analysis import Analysis
from condhint.site import Site


def finding_for(site: Site, a: Analysis, cfg: Config, path: str, origin: str = "", symbolic: bool = False
                ) -> Finding | None:
    """The finding a site's analysis reports, or None; `origin` is the link back to the site (see
    `engine.ModuleAnalysis.site_of`). In a module that works with symbolic or multiprecision numbers
    (`symbolic`), only expressions whose every input has a declared range are reported: the others are most
    likely not binary64 numbers at all."""
    if a.category is None or a.digits is None or _integer_bookkeeping(site, a):
        return None
    if symbolic and any(src != "comment" for src in a.sources.values()):
        return None
    if a.category == "overflow" and not _has_inputs(site):
        return None  # `1e300 * 1e300`: an infinity made on purpose
    nodes = topological(site.root)
    culprit = nodes[a.culprit] if a.culprit is not None else site.root
    if a.category == "overflow" and not a.underflow and culprit.format.name == "binary64" and (
            culprit.is_int or (culprit.kind == "pow" and all(x.is_int for x in culprit.args))):
        return None  # `2 ** ndim`: Python's integers do not overflow (numpy's fixed-width ones are typed)
    kind = BY_CATEGORY["domain" if a.category == "domain-range" else a.category]
    severity = kind.severity(a, cfg)
    if severity is None or kind.message is None:
        return None
    flagged = culprit if culprit.span is not None else site.root
    msg = kind.message(Facts(site, a, flagged, [nodes[i] for i in a.sources_of_error], cfg))
    if severity == "info" and only_at_assumed_extremes(a, cfg):
        msg += declare_note(a)
    related = [(b.line, f"`{b.name}` is computed here") for b in site.bindings if b.line != flagged.span.line]
    chain = site.inlined.get(id(flagged))
    if chain:  # the operation is inside one of the module's own functions, inlined at the call (issue 15)
        path_text = " → ".join(f"`{c.function}` (called at line {c.line})" for c in chain)
        msg = f"In {path_text}, with the ranges of `{site.scope}`: {msg}"
        related = [(c.line, f"`{c.function}` is called here and inlined") for c in chain] + related
    inputs = {k: InputInfo(a.bounds[k][0], a.bounds[k][1], a.sources[k],
                           site.ranges[k].uncertainty if k in site.ranges else None, a.kappa_i.get(k))
              for k in a.names}
    return Finding(
        path=path, span=flagged.span or site.span, code=kind.code, severity=severity, message=msg,
        expression=flagged.text, category=kind.category, digits_lost=a.digits,
        predicted_digits_lost=a.worst_predicted, measured_digits_lost=a.worst_measured,
        kappa=a.worst_kappa if a.worst_kappa is not None else a.kappa, inputs=inputs, worst_at=a.worst_at,
        fraction_affected=a.fraction, related=related, scope=site.scope, result_uncertainty=a.result_uncertainty,
        origin=origin, format=site.float_format.name,
    )


def findings_for(site: Site, a: Analysis, cfg: Config, path: str, origin: str = "", symbolic: bool = False
                 ) -> list[Finding]:
    """The site's finding and, for a loss to rounding that the problem's own κ explains (avoidable only for
    exact inputs), the inherent sensitivity too: it is what remains after a rewrite removes the avoidable part,
    so `check` reports it before a fix as well as after."""
    main = finding_for(site, a, cfg, path, origin, symbolic)
    if main is None or a.category != "formula" or not a.worst_kappa or not math.isfinite(a.worst_kappa):
        return [main] if main is not None else []
    if not kappa_explains(a):
        return [main]
    at_risk = min(math.log10(a.worst_kappa), site.float_format.digits) if a.worst_kappa > 1 else 0.0
    inherent = finding_for(site, replace(a, category="inherent", digits=at_risk, culprit=None), cfg, path, origin,
                           symbolic)
    if inherent is None:
        return [main]
    inherent = replace(inherent, span=main.span, expression=main.expression)
    return [main, inherent]


def not_analysed(path: str, span: Span, reason: str, scope: str = "", expression: str = "") -> Finding:
    return Finding(path=path, span=span, code=NOT_ANALYSED.code, severity=NOT_ANALYSED.severity(),
                   message=reason, scope=scope, expression=expression)


def _has_inputs(site: Site) -> bool:
    """Whether the expression depends on anything but constants."""
    return any(n.kind == INPUT for n in topological(site.root))


def _integer_bookkeeping(site: Site, a: Analysis) -> bool:
    """`n - 1`, `size - 128`, `k * m + 2`, `2 ** nbits`: sums, products and powers of names and integer literals
    only look like counts, offsets and sizes, exact when (as they nearly always are) the names hold integers
    (Python's integers do not overflow either). Reported only when every input's range is declared in a comment."""
    for n in topological(site.root):
        if n.kind == CONST and not n.is_int:
            return False
        if n.kind == "pow" and n.args[1].kind == CONST and (n.args[1].value or 0) < 0:
            return False  # 2 ** -k is a float
        if n.kind not in (INPUT, CONST, "add", "sub", "mul", "neg", "pow"):
            return False
    return any(src != "comment" for src in a.sources.values())
