"""Helpers for rewrite tests: analyse source, get the fixes of its findings, and measure formulas with mpmath.

The measurements here are the tests' own: Python formulas written in the test, run in binary64, against
mpmath at 60 digits on exact double inputs (reference: mpmath; `mpmath.mpf(float)` is exact).
"""
from __future__ import annotations

import math
import textwrap
from typing import Callable, Iterable

import mpmath

from condhint.config import Config
from condhint.engine import ModuleAnalysis, analyse_module
from condhint.expr import Node, topological
from condhint.findings import Finding, Fix
from condhint.fixing import fixes_for
from condhint.rewrites import FIXABLE
from condhint.rewrites.context import Context
from condhint.rewrites.writer import Writer
from condhint.rewrites.verify import Bench
from condhint.site import Site

U = 2.0**-53


def analysed(source: str, **settings) -> ModuleAnalysis:
    cfg = Config(**settings)
    return analyse_module(textwrap.dedent(source), "t.py", cfg, cache=None)


def fixable(ma: ModuleAnalysis) -> list[Finding]:
    return [f for f in ma.report.findings if f.category in FIXABLE]


def fixes_of(source: str, **settings) -> tuple[Finding, list[Fix], ModuleAnalysis]:
    """The one fixable finding of `source` and its verified fixes (best first)."""
    ma = analysed(source, **settings)
    found = fixable(ma)
    assert len(found) == 1, [(f.code, f.expression) for f in ma.report.findings]
    return found[0], fixes_for(found[0], ma, Config(**settings)), ma


def best_fix(source: str, **settings) -> Fix:
    finding, fixes, _ = fixes_of(source, **settings)
    assert fixes, f"no verified fix for {finding.expression}"
    return fixes[0]


def site_with(ma: ModuleAnalysis, text: str) -> tuple[Site, Node]:
    """The site containing a node with source text `text`, and that node."""
    for site in ma.sites:
        for node in topological(site.root):
            if node.text == text and node.span is not None:
                return site, node
    raise AssertionError(f"no node {text!r}")


def context_for(ma: ModuleAnalysis, text: str) -> tuple[Context, Node, Bench, Writer, Site]:
    """A rule context for the node with source text `text` (real samples of its site's ranges)."""
    site, node = site_with(ma, text)
    bench = Bench(site, Config())
    writer = Writer(ma.index, ma.index.constants, site, node)
    return Context(bench, set(writer.names)), node, bench, writer, site


def digits_lost(approx: float, exact) -> float:
    """log10(max(relative error, u) / u), the figure design §2 defines."""
    if not math.isfinite(approx):
        return -math.log10(U)
    err = abs((mpmath.mpf(approx) - exact) / exact)
    return min(-math.log10(U), max(0.0, math.log10(max(float(err), U) / U)))


def worst_loss(py: Callable[..., float], exact: Callable[..., object], points: Iterable[tuple[float, ...]]) -> float:
    """Worst digits lost by the binary64 formula `py` against the mpmath formula `exact` (60 digits)."""
    worst = 0.0
    with mpmath.workdps(60):
        for p in points:
            ref = exact(*(mpmath.mpf(v) for v in p))
            worst = max(worst, digits_lost(py(*p), ref))
    return worst
