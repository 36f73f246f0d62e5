"""Message text: what a practitioner reads at once, one builder per kind of finding (see `kinds`)."""
from __future__ import annotations

import math
from dataclasses import dataclass

from condhint.config import Config
from condhint.expr import INPUT, Node, topological
from condhint.numeric.formats import BINARY64, Format
from condhint.numeric.analysis import Analysis
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.reductions import REDUCTIONS
from condhint.site import Site


def num(x: float | None, digits: int = 2) -> str:
    """A figure for a message, in one style everywhere: 0.5, 980, 1000, 1.2e15, 3.0e-6."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if math.isinf(x):
        return "∞"
    if x != 0 and (abs(x) >= 1e4 or abs(x) < 1e-3):
        return f"{x:.{max(digits - 1, 0)}e}".replace("e+0", "e").replace("e-0", "e-").replace("e+", "e")
    text = f"{x:.{digits}g}"
    return f"{x:.0f}" if "e" in text else text  # 980 and 1000, never 9.8e+02 or 1e+03


def pct(fraction: float) -> str:
    p = 100 * fraction
    return f"{num(p)}%" if p >= 1e4 else f"{p:.0f}%" if p >= 1 else f"{p:.1g}%"


def digits(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.1f}"


def where(at: dict[str, float]) -> str:
    return ", ".join(f"{k} ≈ {num(v, 3)}" for k, v in at.items()) or "its constant inputs"


def counted_in(fmt: Format) -> str:
    """How many digits a result carries, naming the format when it is not binary64: "16 digits",
    "7.2 digits in float32"."""
    return f"{fmt.digits:.0f} digits" if fmt is BINARY64 else f"{fmt.digits:.1f} digits in {fmt.short}"


def in_format(fmt: Format) -> str:
    return "" if fmt is BINARY64 else f" in {fmt.short}"


def at_point(m: "Facts") -> str:
    """The worst point, naming only the inputs of the flagged operation (the others play no part in its loss)."""
    own = {n.name for n in topological(m.flagged) if n.kind == INPUT}
    at = {k: v for k, v in m.analysis.worst_at.items() if k in own} or m.analysis.worst_at
    return where(at)


def code(text: str) -> str:
    text = " ".join(text.split())
    return f"`{text if len(text) <= 60 else text[:57] + '…'}`"


def label(node: Node) -> str:
    fn = OPERATIONS.get(node.kind)
    return fn.label if fn else node.kind


@dataclass(frozen=True)
class Facts:
    """What a message is built from: the site, its analysis, the operation flagged and the settings."""

    site: Site
    analysis: Analysis
    flagged: Node
    sources_of_error: list[Node]
    cfg: Config


    @property
    def share(self) -> str:
        return f"{pct(self.analysis.fraction or 0)} of the sampled range"


def kappa_explains(a: Analysis) -> bool:
    """Whether the problem's own κ accounts for the loss (within a digit): avoidable then only for exact inputs."""
    return (a.worst_kappa or 0) >= 10 ** ((a.digits or 0) - 1)


def formula_message(m: Facts) -> str:
    a, flagged, srcs = m.analysis, m.flagged, m.sources_of_error
    if flagged.kind in ("sub", "add") and len(flagged.args) == 2:
        left, right = flagged.args
        carriers = " and ".join(code(x.text) for x in srcs) if srcs else "the operands"
        gain = f" about ×{num(a.gain, 2)}" if a.gain is not None and a.gain >= 10 else ""
        what = (f"{label(flagged)} of {code(left.text)} and {code(right.text)} cancels their leading digits "
                f"and magnifies{gain} the rounding error carried by {carriers}")
    elif srcs:
        what = f"{label(flagged)} magnifies the rounding error of {', '.join(code(s.text) for s in srcs)}"
    else:
        what = f"the rounding in {label(flagged)} is magnified downstream"
    avoidable = not kappa_explains(a)
    head = (f"Loses {digits(a.digits)} of {counted_in(m.site.float_format)}, "
            + (f"avoidable (κ ≈ {num(a.worst_kappa)})." if avoidable else
               f"avoidable only for exact inputs (κ ≈ {num(a.worst_kappa)})."))
    return (f"{head} {code(flagged.text)} at {at_point(m)}: {what} (predicted {digits(a.worst_predicted)} "
            "digits). "
            + ("The result itself is well-conditioned, so a rewrite of the formula can keep these digits"
               if avoidable else
               "Any error already in the inputs is magnified as much, so a rewrite helps only for exact inputs")
            + f"; ≥ {num(m.cfg.thresholds.info, 2)} digits are lost on {m.share}.")


def inherent_message(m: Facts) -> str:
    a = m.analysis
    k = a.worst_kappa or a.kappa
    msg = (f"Input errors magnified by κ ≈ {num(k)} ({digits(a.digits)} digits at risk), inherent. "
           f"{code(m.site.root.text)} is ill-conditioned at {where(a.worst_at)}, on {m.share}.")
    if a.result_uncertainty is not None:
        msg += f" With the declared input uncertainty the result is uncertain by ±{pct(a.result_uncertainty)}."
    else:
        msg += f" An input known to ±1% gives a result uncertain by about ±{pct(min(k, 1e300) / 100)}."
    return msg + (" The formula is accurate for exact inputs: no rewrite helps; reduce the error of the inputs "
                  "upstream, or reformulate the problem.")


def overflow_message(m: Facts) -> str:
    a = m.analysis
    what = ("underflows to 0" if a.underflow else "overflows to inf") + in_format(m.flagged.format)
    # a reduction that overflows (the sum under a softmax) makes the ratios to it 0 (issue 14)
    returns = "0, inf or nan" if a.underflow or m.flagged.kind in REDUCTIONS else "inf or nan"
    head = ("Intermediate underflow to 0" if a.underflow else "Intermediate overflow to inf") + in_format(m.flagged.format)
    return (f"{head}: returns {returns} for an ordinary result. "
            f"{code(m.flagged.text)} {what} at {at_point(m)} although the result of "
            f"{code(m.site.root.text)} is an ordinary number there.")


def domain_message(m: Facts) -> str:
    a, flagged = m.analysis, m.flagged
    fn = OPERATIONS.get(flagged.kind)
    dom = f" ({fn.domain})" if fn and fn.domain else ""
    if a.category == "domain-range":
        whose = "declared" if all(src.startswith("comment") for src in a.sources.values()) else "inputs'"
        return (f"Undefined{dom} on {pct(a.undefined_fraction)} of the {whose} range. {code(flagged.text)} "
                f"leaves the function's domain at {at_point(m)}.")
    return (f"Rounding leaves the domain{dom}: returns nan where the formula is defined. Rounding pushes the "
            f"argument of {code(flagged.text)} outside its domain at {at_point(m)}.")


FIX_NOTE = "; fix available."


def with_fix_note(message: str) -> str:
    """The message with its first sentence saying that a verified fix exists (added once the fix is found)."""
    head, sep, rest = message.partition(". ")
    if not sep or head.endswith(FIX_NOTE[:-1]):
        return message
    return f"{head}{FIX_NOTE} {rest}"


def declare_note(a: Analysis) -> str:
    """What to declare when a loss shows only at magnitudes the assumed range guessed."""
    names = ", ".join(f"`{k}`" for k in (a.assumed or a.names))
    whose = "the guessed range reaches" if a.assumed else "the code's own bounds allow"
    return (f" This shows only at values of {names} that {whose} but the code may never see "
            "(at its ends, or in a narrow part of it): declare the real range in a `# condhint:` comment to check "
            "it.")
