"""The registry of finding kinds: one record per code, read by every layer (messages, outputs, rule help,
`fix`, the language server). A new kind of finding is one record here plus its test."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from condhint.config import Config
from condhint.loop_messages import recurrence_message
from condhint.messages import Facts, domain_message, formula_message, inherent_message, overflow_message
from condhint.numeric.analysis import Analysis


@dataclass(frozen=True)
class Kind:
    code: str
    name: str
    category: str | None  # the analysis category it reports (None: not a numeric finding)
    title: str  # a short description (rule lists, SARIF)
    help: str  # what the finding means, for rule documentation (SARIF, `--statistics`)
    fixable: bool  # verified rewrites are searched for it
    message: Callable[[Facts], str] | Callable[..., str] | None = None  # loop kinds take `LoopFacts`
    severity: Callable[..., str | None] = lambda *_: "info"  # (analysis, cfg) -> severity; None: not reported


def _by_digits(a: Analysis, cfg: Config) -> str | None:
    severity = cfg.thresholds.severity(a.digits) if a.digits is not None else None
    if severity in ("warning", "error") and only_at_assumed_extremes(a, cfg):
        return "info"  # quiet when unsure: the message says what to declare
    return severity


NARROW = 0.05  # a loss on under 5% of ranges the user did not declare needs inputs nobody vouches for


def only_at_assumed_extremes(a: Analysis, cfg: Config) -> bool:
    """A loss that shows only toward the ends of assumed (guessed) ranges and on under half of them, or only in a
    narrow band of ranges the user did not declare (under 5% of the samples: within a hair of a guard's bound or
    of a zero of the result, `sin(x)` at x = 2π of a grid): the code may never see those inputs."""
    sources = getattr(a, "sources", None)  # loops report their figures as measured (`loop_findings.py`)
    if not sources or all(src.startswith("comment") for src in sources.values()):
        return False
    share = a.fraction or 0.0
    if share < NARROW:
        return True
    return bool(a.assumed) and a.ordinary_digits is not None and a.ordinary_digits < cfg.thresholds.warning \
        and share < 0.5


def _on_enough_of_the_range(a: Analysis, cfg: Config) -> str | None:
    """A loss on guessed ranges counts only where it covers a real share of them."""
    if not a.declared and (a.fraction or 0) < cfg.min_fraction:
        return None
    return _by_digits(a, cfg)


def _sensitivity(a: Analysis, cfg: Config) -> str | None:
    # Sensitivity is a property of the real input ranges: with any range guessed it can be that guess's
    # doing (on real code it nearly always was: docs/robustness.md), so it is shown in hover only.
    if not all(src != "default" for src in a.sources.values()):
        return None
    return _on_enough_of_the_range(a, cfg)


def _domain(a: Analysis, cfg: Config) -> str | None:
    return "info" if a.category == "domain-range" else _by_digits(a, cfg)


KINDS: tuple[Kind, ...] = (
    Kind("CH001", "not-analysed", None,
         "Code that could not be analysed",
         "condhint could not analyse this code (a syntax error, an unreadable file, a comment it does not "
         "understand, or an expression over its time budget). The rest of the file is analysed.", False),
    Kind("CH101", "avoidable-loss", "formula",
         "Digits lost to the formula's own rounding (avoidable)",
         "The formula loses digits to its own rounding at inputs on its range, although the result itself is "
         "well-conditioned: an algebraically equivalent formula can be more accurate.", True,
         formula_message, _on_enough_of_the_range),
    # ---- loops (issue 15): measured by iterating the loop, see `loop_findings.py` ----
    Kind("CH102", "unstable-recurrence", "recurrence",
         "A loop recurrence that amplifies rounding errors",
         "A loop computes each value from the previous ones in a way that multiplies the error already carried at "
         "every step (errors grow geometrically, like n! for the recurrence I(n) = 1 - n I(n-1)), so the "
         "rounding of the starting value and of each step eventually swamps the result. Running the recurrence "
         "in the other direction, or a closed form, avoids it.", False, recurrence_message, _on_enough_of_the_range),
    Kind("CH201", "input-sensitivity", "inherent",
         "Result sensitive to errors in its inputs (inherent)",
         "The result is sensitive to its inputs (large condition number κ): errors already in the inputs are "
         "magnified by κ. No rewrite of this formula helps; reduce the error of the inputs upstream.", False,
         inherent_message, _sensitivity),
    Kind("CH301", "overflow-risk", "overflow",
         "Intermediate overflow or underflow",
         "An intermediate value overflows or underflows on the range while the true result is an ordinary "
         "number.", True, overflow_message, _by_digits),
    Kind("CH302", "domain-risk", "domain",
         "Rounding leaves a function's domain",
         "Rounding pushes an argument outside a function's domain (or the declared range leaves it), so the "
         "code returns nan or raises where the exact formula is defined.", True, domain_message, _domain),
)
BY_CODE: dict[str, Kind] = {k.code: k for k in KINDS}
BY_CATEGORY: dict[str, Kind] = {k.category: k for k in KINDS if k.category}
NOT_ANALYSED = BY_CODE["CH001"]
FIXABLE_CATEGORIES = tuple(k.category for k in KINDS if k.fixable and k.category)
