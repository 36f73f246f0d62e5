"""The re-analysis that confirms a fix works on the definition holding the finding, with the rest blanked."""
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
