"""The last check of a fix: the patched code, analysed again, has lost this finding and gained no other.

Only the part of the file the fix can affect is analysed again: the top-level function or class it is in,
with all module-level code around it (imports, constants), other top-level definitions blanked out so
line numbers stay put. A fix in module-level code re-analyses the whole file.
"""
from __future__ import annotations

from collections import Counter
from typing import TYPE_CHECKING, Callable

from condhint.findings import FileReport, Finding, Fix
from condhint.kinds import FIXABLE_CATEGORIES
from condhint.rewrites.apply import apply_fixes

if TYPE_CHECKING:
    from condhint.reading.module_index import ModuleIndex

FIXABLE = FIXABLE_CATEGORIES
RECHECKED = 3  # how many of the best candidates are re-analysed at most


def fixable_findings(findings: list[Finding]) -> Counter[tuple[str, str, str]]:
    return Counter((f.code, f.scope, " ".join(f.expression.split())) for f in findings if f.category in FIXABLE)


def rechecked(fixes: list[Fix], finding: Finding, index: "ModuleIndex",
              reanalyse: Callable[[str], FileReport]) -> list[Fix]:
    """The fixes (at most `RECHECKED`, in order) whose patched code re-analyses without `finding` and
    without any new fixable finding."""
    if not fixes:
        return []
    line = finding.span.line
    original = index.text if index.unit_at(line).is_module else index.focused_text(line)
    before = fixable_findings(reanalyse(original).findings)
    (own,) = fixable_findings([finding]) or [None]
    out: list[Fix] = []
    for fix in fixes[:RECHECKED]:
        try:
            patched = apply_fixes(original, [fix])
        except ValueError:
            continue
        again = reanalyse(patched)
        if again.status != "ok":
            continue
        after = fixable_findings(again.findings)
        if after - before or after[own] >= before[own]:
            continue
        out.append(fix)
    return out
