"""The last check of a fix: the patched code, analysed again, has lost this finding and gained no other.

Only the part of the file the fix can affect is analysed again: the top-level function or class it is in,
with all module-level code around it (imports, constants), other top-level definitions blanked out so
line numbers stay put. A fix in module-level code re-analyses the whole file.
"""
from __future__ import annotations

from collections import Counter
from typing import TYPE_CHECKING, Callable

from condhint.findings import Finding, Fix
from condhint.kinds import FIXABLE_CATEGORIES
from condhint.rewrites.apply import apply_fixes
from condhint.rewrites.verify import MIN_GAIN

if TYPE_CHECKING:
    from condhint.engine import ModuleAnalysis
    from condhint.reading.module_index import ModuleIndex

FIXABLE = FIXABLE_CATEGORIES
RECHECKED = 3  # how many of the best candidates are re-analysed at most
NOISE = 0.5  # digits: a re-measured loss this much above the original's is not yet a worse one


def _key(f: Finding) -> tuple[str, str, str]:
    return f.code, f.scope, " ".join(f.expression.split())


Reported = tuple[tuple[str, str, str], "tuple[str, str, int, int] | None", float]


def _reported(ma: "ModuleAnalysis") -> list[Reported]:
    """Each fixable finding: its key, the analysed expression it is reported on (code, scope, start) and the
    digits lost."""
    out: list[Reported] = []
    for f in ma.report.findings:
        if f.category in FIXABLE:
            site = ma.site_of(f)
            out.append((_key(f), (f.code, f.scope, site.span.line, site.span.col) if site else None,
                        f.digits_lost or 0.0))
    return out


def rechecked(fixes: list[Fix], finding: Finding, index: "ModuleIndex",
              reanalyse: Callable[[str], "ModuleAnalysis"]) -> list[Fix]:
    """The fixes (at most `RECHECKED`, in order) whose patched code re-analyses without `finding`, or with it
    at least `MIN_GAIN` digits smaller, and without a new fixable finding. The finding may stay where the fix
    keeps the formula as written for part of the range (a series below a switch point, the code beyond it,
    where it still loses some digits). A finding on another expression counts as new unless that expression
    lost as much in the original code: there its loss was reported under an operation the fix has made
    accurate (`np.sqrt(1 - x*x)` after `x`'s own formula is fixed)."""
    if not fixes:
        return []
    line = finding.span.line
    original = index.text if index.unit_at(line).is_module else index.focused_text(line)
    first = _reported(reanalyse(original))
    before = Counter(k for k, _, _ in first)
    losses: dict[object, float] = {}
    for _, site, lost in first:
        losses[site] = max(losses.get(site, 0.0), lost)
    own = _key(finding)
    out: list[Fix] = []
    for fix in fixes[:RECHECKED]:
        try:
            patched = apply_fixes(original, [fix])
        except ValueError:
            continue
        again = reanalyse(patched)
        if again.report.status != "ok":
            continue
        now = _reported(again)
        after = Counter(k for k, _, _ in now)
        if after[own] >= before[own] and _worst(now, own) > _worst(first, own) - MIN_GAIN:
            continue
        gained = after - before
        if any(k in gained and (site is None or losses.get(site, -1.0) + NOISE < lost) for k, site, lost in now):
            continue
        out.append(fix)
    return out


def _worst(reported: list[Reported], key: tuple[str, str, str]) -> float:
    return max((lost for k, _, lost in reported if k == key), default=0.0)
