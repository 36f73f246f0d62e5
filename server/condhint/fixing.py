"""The one step that gives findings their verified fixes, called by `check`, `fix`, `explain` and the
language server. The core (`engine`) never imports the rewrites; this module hands them what they need: the
finding's site and analysis, the module index, and a way to analyse a patched text again."""
from __future__ import annotations

import types
from dataclasses import replace

from condhint.config import Config
from condhint.engine import DEFAULT_CACHE, LOOP_CACHE, AnalysisCache, ModuleAnalysis, UnitCache, analyse_module
from condhint.findings import Finding, Fix
from condhint.loop_findings import LOOP, loop_fixes, loop_number
from condhint.messages import with_fix_note
from condhint.reading.module_index import read_module


def rewrites() -> types.ModuleType | None:
    """The rewrites package, or None where it is not installed."""
    try:
        import condhint.rewrites as package
    except ImportError as exc:
        if isinstance(exc, ModuleNotFoundError) and exc.name and not exc.name.startswith("condhint.rewrites"):
            raise  # a dependency of the rewrites is missing: say so
        return None
    return package


def fixes_for(finding: Finding, ma: ModuleAnalysis, cfg: Config, cache: AnalysisCache | None = None,
              seconds: float | None = None) -> list[Fix]:
    """Verified fixes for one finding of `ma`, best first (empty when none is verified)."""
    package = rewrites()
    loop = loop_number(finding.origin)
    if loop is not None:  # a loop finding (issue 15): its fixes are verified by iterating the loop
        owner = next((u for u in ma.units if u.key == finding.origin.rpartition(LOOP)[0]), None)
        recs = owner.recurrences if owner is not None else []
        return loop_fixes(recs[loop], finding, cfg, LOOP_CACHE) if loop < len(recs) else []
    site = ma.site_of(finding)
    unit = next((u for u in ma.units if u.key == finding.origin.rpartition("#")[0]), None)
    if package is None or site is None or unit is None or ma.index is None:
        return []
    if ma.index.names.uses_sympy or ma.index.names.uses_mpmath:
        return []  # its values may be symbolic or of another precision: a `math` rewrite could not take them
    if site.inlined:
        # Operations inlined from a callee (issue 15): a rewrite would either edit a function other callers
        # share, judged on this caller's ranges only, or spell the callee's names in the caller. None is offered.
        return []
    quiet = replace(cfg, kappa_formula=False)
    units = UnitCache(64)

    def reanalyse(text: str) -> ModuleAnalysis:
        return analyse_module(text, ma.report.path, quiet, cache or DEFAULT_CACHE, units=units)

    # The definition holding the finding with the module-level code around it: all a fix can affect, and a
    # small syntax tree to write code against (the whole module's is not kept by the language server).
    line = finding.span.line
    focused = None if ma.index.unit_at(line).is_module else read_module(ma.index.focused_text(line))[0]
    subject = package.Subject(finding, site, unit.analyses.get(id(site)), focused or ma.index, unit.constants,
                              reanalyse)
    return package.fixes_for(subject, cfg) if seconds is None else package.fixes_for(subject, cfg, seconds)


def attach_fixes(ma: ModuleAnalysis, cfg: Config, cache: AnalysisCache | None = None,
                 chosen: list[Finding] | None = None) -> None:
    """Give every fixable finding of the module (or only those `chosen`) its verified fixes."""
    package = rewrites()
    if package is None:
        return
    wanted = {id(f) for f in chosen} if chosen is not None else None
    for f in ma.report.findings:
        if f.category in package.FIXABLE and (wanted is None or id(f) in wanted):
            f.fixes = fixes_for(f, ma, cfg, cache)
            if f.fixes:
                f.message = with_fix_note(f.message)


def quick_fix_title(fix: Fix, finding: Finding) -> str:
    """The title an editor shows for the quick fix (also named by `explain`): the rewrite's title with its
    measured improvement (the rewrite engine's titles usually say it)."""
    if "digit" in fix.title:
        return fix.title
    before = finding.digits_lost if finding.digits_lost is not None else fix.measured_digits_lost_before
    return f"{fix.title} (loses {fix.measured_digits_lost_after:.1f} instead of {before:.1f} digits, measured)"
