"""Findings from analyses: codes, severities and messages a practitioner reads at once."""
from __future__ import annotations

import math

from condhint.config import Config
from condhint.expr import Node, Span, topological
from condhint.findings import CODE_OF_CATEGORY, Finding, InputInfo
from condhint.numeric.analysis import Analysis
from condhint.numeric.functions import FUNCTIONS
from condhint.site import Site


def num(x: float | None, digits: int = 2) -> str:
    """A figure for a message: 0.5, 3e+02, 1.2e+15."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if math.isinf(x):
        return "∞"
    if x != 0 and (abs(x) >= 1e4 or abs(x) < 1e-3):
        return f"{x:.{max(digits - 1, 0)}e}".replace("e+0", "e").replace("e-0", "e-").replace("e+", "e")
    return f"{x:.{digits}g}"


def pct(fraction: float) -> str:
    p = 100 * fraction
    return f"{p:.0f}%" if p >= 1 else f"{p:.1g}%"


def digits(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.1f}"


def where(at: dict[str, float]) -> str:
    return ", ".join(f"{k} ≈ {num(v, 3)}" for k, v in at.items()) or "its constant inputs"


def _code(text: str) -> str:
    text = " ".join(text.split())
    return f"`{text if len(text) <= 60 else text[:57] + '…'}`"


def _label(node: Node) -> str:
    fn = FUNCTIONS.get(node.kind)
    return fn.label if fn else node.kind


def finding_for(site: Site, a: Analysis, cfg: Config, path: str) -> Finding | None:
    if a.category is None or a.digits is None:
        return None
    nodes = topological(site.root)
    culprit = nodes[a.culprit] if a.culprit is not None else site.root
    flagged = culprit if culprit.span is not None else site.root
    total = site.float_format.digits
    th = cfg.thresholds
    cat = "domain" if a.category == "domain-range" else a.category
    if not a.declared and (a.fraction or 0) < cfg.min_fraction and cat in ("formula", "inherent"):
        return None
    if cat == "inherent" and not all(src != "default" for src in a.sources.values()):
        # Sensitivity is a property of the real input ranges: with any range guessed it can be that guess's
        # doing (on real code it nearly always was: docs/robustness.md), so it is shown in hover only.
        return None
    severity = th.severity(a.digits) if a.category != "domain-range" else "info"
    if severity is None:
        return None
    srcs = [nodes[i] for i in a.sources_of_error]
    frac = f"{pct(a.fraction or 0)} of the sampled range"
    text = flagged.text
    if cat == "formula":
        if flagged.kind in ("sub", "add") and len(flagged.args) == 2:
            left, right = flagged.args
            carriers = " and ".join(_code(x.text) for x in srcs) if srcs else "the operands"
            gain = f" about ×{num(a.gain, 2)}" if a.gain is not None and a.gain >= 10 else ""
            what = (f"{_label(flagged)} of {_code(left.text)} and {_code(right.text)} cancels their leading digits "
                    f"and magnifies{gain} the rounding error carried by {carriers}")
        elif srcs:
            what = f"{_label(flagged)} magnifies the rounding error of {', '.join(_code(s.text) for s in srcs)}"
        else:
            what = f"the rounding in {_label(flagged)} is magnified downstream"
        msg = (f"{_code(text)} loses {digits(a.digits)} of {total:.0f} digits at {where(a.worst_at)} "
               f"(predicted {digits(a.worst_predicted)}): {what}. "
               + (f"The result itself needs only κ ≈ {num(a.worst_kappa)}, so this loss is avoidable by rewriting "
                  "the formula" if (a.worst_kappa or 0) < 10 ** (a.digits - 1) else
                  f"The inputs are exact here and the problem has κ ≈ {num(a.worst_kappa)}, yet the digits are lost "
                  "to rounding inside the formula, so a different formula can avoid the loss")
               + f"; ≥ {num(th.info, 2)} digits are lost on {frac}.")
    elif cat == "inherent":
        k = a.worst_kappa or a.kappa
        msg = (f"{_code(site.root.text)} is ill-conditioned at {where(a.worst_at)}: κ ≈ {num(k)} magnifies any "
               f"relative error already in its inputs ({digits(a.digits)} digits at risk, on {frac}).")
        if a.result_uncertainty is not None:
            msg += f" With the declared input uncertainty the result is uncertain by ±{pct(a.result_uncertainty)}."
        else:
            msg += f" An input known to ±1% gives a result uncertain by about ±{pct(min(k, 1e300) / 100)}."
        msg += (" The formula is accurate for exact inputs: no rewrite helps; reduce the error of the inputs "
                "upstream, or reformulate the problem.")
    elif cat == "overflow":
        what = "underflows to 0" if a.underflow else "overflows to inf"
        msg = (f"{_code(flagged.text)} {what} at {where(a.worst_at)} although the result of "
               f"{_code(site.root.text)} is an ordinary number there, so the code returns "
               f"{'0, inf or nan' if a.underflow else 'inf or nan'} instead.")
    else:
        fn = FUNCTIONS.get(flagged.kind)
        dom = f" ({fn.domain})" if fn and fn.domain else ""
        if a.category == "domain-range":
            msg = (f"{_code(flagged.text)} is undefined{dom} on {pct(a.undefined_fraction)} of the declared "
                   f"range (e.g. at {where(a.worst_at)}): the declared range leaves the function's domain.")
        else:
            msg = (f"rounding pushes the argument of {_code(flagged.text)} outside its domain{dom} at "
                   f"{where(a.worst_at)}, so the code returns nan where the exact formula is defined.")
    related = [(b.line, f"`{b.name}` is computed here") for b in site.bindings if b.line != flagged.span.line]
    inputs = {k: InputInfo(a.bounds[k][0], a.bounds[k][1], a.sources[k],
                           site.ranges[k].uncertainty if k in site.ranges else None, a.kappa_i.get(k))
              for k in a.names}
    measured = a.worst_measured
    return Finding(
        path=path, span=flagged.span or site.span, code=CODE_OF_CATEGORY[cat], severity=severity, message=msg,
        expression=flagged.text, category=cat, digits_lost=a.digits, predicted_digits_lost=a.worst_predicted,
        measured_digits_lost=measured, kappa=a.worst_kappa if a.worst_kappa is not None else a.kappa,
        inputs=inputs, worst_at=a.worst_at, fraction_affected=a.fraction, related=related, scope=site.scope,
        result_uncertainty=a.result_uncertainty, site_key=site.root.key(),
    )


def not_analysed(path: str, span: Span, reason: str, scope: str = "", expression: str = "") -> Finding:
    return Finding(path=path, span=span, code="CH001", severity="info", message=reason, scope=scope,
                   expression=expression)
