"""The re-analysis that confirms a fix works on the definition holding the finding, with the rest blanked; a fix of
a shared intermediate lands on its binding."""
from __future__ import annotations

import ast

from tests.rewrites.support import analysed, fixes_of

# A finding in one definition, in a module whose later definitions are decorated (test classes usually are):
# blanking them must leave text that parses, or no fix could ever be confirmed in such a file.
DECORATED_AFTER = '''import math


def register(cls):
    return cls


class Curve:
    def excess(self, x):  # condhint: 1e-8 <= x <= 1e-3
        return math.exp(x) - 1


@register
class Later:
    pass
'''


def test_blanked_decorated_definitions_leave_text_that_parses():
    ma = analysed(DECORATED_AFTER)
    line = DECORATED_AFTER.splitlines().index("        return math.exp(x) - 1") + 1
    focused = ma.index.focused_text(line)
    ast.parse(focused)
    assert "math.exp(x) - 1" in focused and "pass\n" not in focused.split("class Curve")[0]


def test_a_fix_is_confirmed_in_a_module_ending_in_a_decorated_definition():
    finding, fixes, _ = fixes_of(DECORATED_AFTER)
    assert finding.expression == "math.exp(x) - 1"
    assert fixes and fixes[0].replacement == "math.expm1(x)"


# A loss in an intermediate that the code uses more than once is reported at its binding, and the fix rewrites
# the binding, so every use gets the accurate value (1 − cos t = 2 sin²(t/2), NIST DLMF ch. 4, half-angle formula).
SAGITTA = '''import math


def sagitta(r, t):  # condhint: 1 <= r <= 10, 1e-8 <= t <= 1e-3
    c = 1 - math.cos(t)
    depth = r * c
    area = r * r * c / t
    return depth + area
'''


def test_a_shared_intermediate_is_fixed_at_its_binding():
    from condhint.config import Config
    from condhint.fixing import attach_fixes
    from condhint.rewrites import apply_fixes

    ma = analysed(SAGITTA)
    attach_fixes(ma, Config())
    flagged = [f for f in ma.report.findings if f.severity in ("warning", "error")]
    assert [(f.span.line, f.expression) for f in flagged] == [(5, "1 - math.cos(t)")]
    (fix, *_) = flagged[0].fixes
    assert (fix.span.line, fix.replacement) == (5, "2 * math.sin(t / 2) ** 2")
    fixed = apply_fixes(SAGITTA, [fix])
    assert "    c = 2 * math.sin(t / 2) ** 2\n    depth = r * c\n    area = r * r * c / t\n" in fixed
    again = analysed(fixed)
    assert not [f for f in again.report.findings if f.severity in ("warning", "error")]


# A sampler of our own in the style of Wood's von Mises-Fisher method: the logarithm of a value near one, and
# later 1 − x² of its result. Before the fix, the loss of the second line is reported at the logarithm (its
# error dominates); after it, 1 − x² shows its own smaller cancellation (x near −1) on the same expression.
SAMPLER = '''import numpy as np


def sample(kappa, u):  # condhint: 1e-4 <= kappa <= 1e-3, 1e-4 <= u <= 1e-3
    x = 1. + np.log(u + (1. - u) * np.exp(-2 * kappa))/kappa
    return np.sqrt(1. - np.square(x))
'''


def test_a_fix_that_uncovers_a_smaller_loss_it_did_not_cause_is_kept():
    ma = analysed(SAMPLER)
    before = {f.expression: f.digits_lost for f in ma.report.findings if f.code == "CH101"}
    assert set(before) == {"np.log(u + (1. - u) * np.exp(-2 * kappa))"}
    finding, fixes, _ = fixes_of(SAMPLER)
    assert fixes and fixes[0].rule == "log-near-one"
    after = analysed(SAMPLER.replace(finding.expression, fixes[0].replacement))
    left = {f.expression: f.digits_lost for f in after.report.findings if f.code == "CH101"}
    assert set(left) == {"1. - np.square(x)"} and left["1. - np.square(x)"] < min(before.values())
