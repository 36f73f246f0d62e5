"""Generated code: the file's own module aliases and import style, the user's names and text, minimal and
correct parentheses, no repeated calls with possible side effects, and a result that re-parses and
re-analyses without the loss."""
from __future__ import annotations

import ast
import textwrap

import pytest

from condhint.config import Config
from condhint.fixing import attach_fixes
from condhint.engine import analyse_module
from condhint.rewrites import apply_fixes, codegen
from condhint.rewrites.codegen import Unspellable
from condhint.rewrites.rules import BY_ID
from tests.rewrites.support import analysed, best_fix, context_for, fixable, fixes_of, site_with

EXPM1 = "{imp}\ndef f(x):  # condhint: 1e-12 <= x <= 1e-3\n    return {e}(x) - 1\n"


@pytest.mark.parametrize("imp,spelling,replacement,imports", [
    ("import numpy as np", "np.exp", "np.expm1(x)", []),
    ("import numpy", "numpy.exp", "numpy.expm1(x)", []),
    ("import math as m", "m.exp", "m.expm1(x)", []),
    ("from math import exp", "exp", "expm1(x)", ["from math import expm1"]),
    ("from numpy import exp", "exp", "expm1(x)", ["from numpy import expm1"]),
    ("from math import exp, expm1 as em", "exp", "em(x)", []),
    ("import math\nfrom math import exp", "exp", "expm1(x)", ["from math import expm1"]),
    ("from math import exp\nexpm1 = 3.0", "exp", "math.expm1(x)", ["import math"]),  # the name is taken
])
def test_functions_are_spelled_the_way_the_file_spells_them(imp, spelling, replacement, imports):
    fix = best_fix(EXPM1.format(imp=imp, e=spelling))
    assert (fix.replacement, fix.imports) == (replacement, imports)


def test_code_without_calls_uses_the_modules_the_file_imports():
    src = "import numpy as np\ndef f(r, n):  # condhint: 0.01 <= r <= 0.1, 1e4 <= n <= 1e9\n    return (1 + r/n)**(n*10.0)\n"
    fix = best_fix(src)
    assert (fix.replacement, fix.imports) == ("np.exp(n*10.0 * np.log1p(r/n))", [])


def test_the_users_text_of_untouched_subexpressions_is_kept():
    src = "import math\ndef f(x):  # condhint: 1e6 <= x <= 1e15\n    return math.sqrt( x+1 ) - math.sqrt(x)\n"
    assert best_fix(src).replacement == "1 / (math.sqrt( x+1 ) + math.sqrt(x))"


def test_names_bound_on_earlier_lines_are_used_where_the_loss_is():
    src = """
    import math
    def roots(a, b, c):  # condhint: 1 <= a <= 2, 1e4 <= b <= 1e8, 1 <= c <= 2
        disc = b * b - 4 * a * c
        root = math.sqrt(disc)
        return (-b + root) / (2 * a)
    """
    fix = best_fix(src)
    assert fix.span.line == 6
    assert fix.replacement == "c / (-0.5 * (b + root))"


def test_a_loss_on_an_earlier_line_is_fixed_on_that_line():
    src = """
    import math
    def f(x):  # condhint: 1e6 <= x <= 1e15
        d = math.sqrt(x + 1) - math.sqrt(x)
        return 3 * d
    """
    fix = best_fix(src)
    assert (fix.span.line, fix.replacement) == (4, "1 / (math.sqrt(x + 1) + math.sqrt(x))")


@pytest.mark.parametrize("expr,fixed", [
    ("3.0 / (exp(x) - 1)", "3.0 / expm1(x)"),  # grouping parentheses an atom no longer needs are dropped
    ("(exp(x) - 1) ** 2", "expm1(x) ** 2"),
    ("(1 - cos(x)) ** 2", "(2 * sin(x / 2) ** 2) ** 2"),  # the user's own grouping stays where it is needed
    ("3.0 * (1 - cos(x))", "3.0 * (2 * sin(x / 2) ** 2)"),
    ("f(log(1 + x))", "f(log1p(x))"),  # a call's parentheses are never taken for grouping
    ("f((log(1 + x)))", "f(log1p(x))"),
])
def test_parentheses_are_minimal_and_correct(expr, fixed):
    src = f"from math import cos, exp, log, sin\ndef g(x):  # condhint: 1e-9 <= x <= 1e-3\n    return {expr}\n"
    ma = analysed(src)
    (finding,) = fixable(ma)
    from condhint.fixing import fixes_for

    (fix, *_) = fixes_for(finding, ma, Config())
    out = apply_fixes(ma.index.text, [fix])
    line = out.splitlines()[-1].strip()
    assert line == f"return {fixed}", out
    ast.parse(out)


def test_a_replacement_of_lower_precedence_is_parenthesised_where_its_place_needs_it():
    src = ("import math\ndef f(a, b):  # condhint: -2000 <= a <= -800, -2000 <= b <= -800\n"
           "    return math.log(math.exp(a) + math.exp(b)) * 2\n")
    fix = best_fix(src)
    assert fix.replacement == "(max(a, b) + math.log1p(math.exp(-abs(a - b))))"


def test_unknown_calls_are_not_repeated():
    ma = analysed("def f(y):\n    return g(y)**2 - y**2\n")
    ctx, node, _, writer, _ = context_for(ma, "g(y)**2 - y**2")
    (cand,) = BY_ID["difference-of-squares"].candidates(node, ctx)
    with pytest.raises(Unspellable):
        writer.write(cand)  # (g(y) - y) * (g(y) + y) would call g twice


def test_unknown_calls_may_appear_as_often_as_in_the_original():
    ma = analysed("import math\ndef f(y):\n    return math.sqrt(g(y) + 1) - math.sqrt(g(y))\n")
    ctx, node, _, writer, _ = context_for(ma, "math.sqrt(g(y) + 1) - math.sqrt(g(y))")
    (cand,) = BY_ID["sqrt-difference"].candidates(node, ctx)
    text, imports, _ = writer.write(cand)
    assert text == "1 / (math.sqrt(g(y) + 1) + math.sqrt(g(y)))" and imports == []


def test_the_fixed_file_parses_and_re_analyses_without_the_loss():
    src = textwrap.dedent("""
        from math import cos, sqrt
        def dip(tether, theta):  # condhint: 1 <= tether <= 100
            assert 0 < theta < 0.01
            return tether * (1 - cos(theta))
        def magnitude(x, y):  # condhint: 1e-200 <= x <= 1e200, 1e-200 <= y <= 1e200
            return sqrt(x * x + y * y)
        """)
    ma = analyse_module(src, "t.py", Config(), cache=None)
    attach_fixes(ma, Config())
    fixes = [fx[0] for fx in (f.fixes for f in fixable(ma)) if fx]
    assert len(fixes) == 2
    out = apply_fixes(src, fixes)
    assert out.splitlines()[1] == "from math import sin, hypot"  # cos and sqrt are no longer used
    again = analyse_module(out, "t.py", Config(), cache=None)
    assert again.report.status == "ok" and fixable(again) == []


def test_a_name_rebound_before_the_edit_is_not_used_for_its_old_value():
    ma = analysed("""
    import math
    def f(x):  # condhint: 1e6 <= x <= 1e15
        s = math.sqrt(x + 1)
        d = s - math.sqrt(x)
        s = 5.0
        return d * s
    """)
    from condhint.rewrites.writer import visible_names

    site, node = site_with(ma, "d * s")
    names = visible_names(ma.index, ma.index.constants, site, node)
    assert sorted(names.values()) == ["d"]  # `s` no longer holds math.sqrt(x + 1) on the last line
    site, node = site_with(ma, "s - math.sqrt(x)")
    assert sorted(visible_names(ma.index, ma.index.constants, site, node).values()) == ["s"]


@pytest.mark.parametrize("imp,fn,replacement", [
    ("import math", "math.sqrt", "math.hypot(x, y, z)"),  # math.hypot takes n arguments (Python ≥ 3.8)
    ("import numpy as np", "np.sqrt", "np.hypot(np.hypot(x, y), z)"),  # numpy's takes two: nested
])
def test_a_nest_of_a_variadic_function_is_one_call_only_where_the_function_takes_n_arguments(imp, fn, replacement):
    src = f"{imp}\ndef f(x, y, z):  # condhint: 1e-200 <= x <= 1e200, 1e-200 <= y <= 1e200, 1e-200 <= z <= 1e200\n" \
          f"    return {fn}(x*x + y*y + z*z)\n"
    assert best_fix(src).replacement == replacement


# scipy.special's functions take arrays, like numpy's: a choice in code that calls them is numpy's `where`, never
# `a if c else b` (which raises on an array), and without numpy in the file it is not written at all.
ERF_SUM = ("def mixed(x, c):  # condhint: -6 <= x <= 6, 0.5 <= c <= 1\n"
           "    return sc.erf(x + c) + sc.erf(c - x)\n")


def test_a_choice_in_scipy_special_code_is_numpys_where():
    fix = best_fix("import numpy as np\nimport scipy.special as sc\n\n\n" + ERF_SUM)
    assert fix.replacement == ("np.where(np.minimum(x + c, x - c) > 0.5, sc.erfc(x - c) - sc.erfc(x + c), "
                               "np.where(np.maximum(x + c, x - c) < -0.5, sc.erfc(-(x + c)) - sc.erfc(c - x), "
                               "sc.erf(x + c) + sc.erf(c - x)))")


def test_no_python_choice_is_written_in_scipy_special_code():
    finding, fixes, _ = fixes_of("import scipy.special as sc\n\n\n" + ERF_SUM)
    assert finding.code == "CH101" and all(" if " not in f.replacement for f in fixes)


def test_python_code_makes_a_repeated_choice_once():
    # A rewrite's branch may repeat its test inside (the quotient divides by 1 where numpy's `where` does not take
    # it, because numpy computes both sides). Python evaluates only the branch taken, so the inner choice is
    # written as decided. The tilt of an ellipse whose axes may come in either order (an invented case).
    fix = best_fix("import math\n\n\ndef tilt(a, b, c):  # condhint: 1 <= a <= 10, 1e-6 <= b <= 1e-3, 1 <= c <= 10\n"
                   "    delta = (((a - c) * 0.5) ** 2 + b * b) ** 0.5\n    major = (a + c) * 0.5 + delta\n"
                   "    return math.atan2(major - a, b)\n")
    assert fix.rule == "rationalise"
    assert fix.replacement == "b * b / (a / 2 + delta - c / 2) if c / 2 - a / 2 < 0 else major - a"


def test_a_text_continued_over_lines_is_a_place_to_replace_but_not_text_to_reuse():
    # `a\n + b` reads as an expression only inside the brackets around it in the source (Python's grammar): a fix
    # may replace it there, but text reused inside a fix must read alone wherever the fix puts it.
    assert not codegen.is_expression("a\n    + b") and codegen.is_expression("a\n    + b", bracketed=True)
    assert codegen.is_expression("f(a,\n  b)") and not codegen.is_expression("a +", bracketed=True)
