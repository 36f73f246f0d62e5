"""A fix never changes what the code computes: it is checked at the other sign of inputs whose sign the code
does not fix, and never writes a name that holds another value where the fix lands."""
from __future__ import annotations

import numpy as np
import pytest

from condhint.config import Config
from condhint.expr import topological
from condhint.rewrites import codegen, dag
from tests.rewrites.support import analysed, context_for


def test_a_candidate_equal_only_for_positive_inputs_is_refused_on_an_assumed_range() -> None:
    # sqrt(x * x) is |x|: the candidate `x` agrees only for x > 0 (common practice)
    for header, refused in (("def f(x):", True), ("def f(x):  # condhint: 1e-3 <= x <= 1e3", False)):
        ma = analysed(f"import math\n{header}\n    return math.sqrt(x * x) + 1.0\n")
        ctx, node, bench, _, site = context_for(ma, "math.sqrt(x * x)")
        x = next(n for n in _nodes(site.root) if n.kind == "input")
        candidate = dag.substitute(site.root, node, x)
        idx = np.arange(bench.n)
        why = bench.unsigned_disagreement(candidate, idx, 1e-12, None)
        assert (why is not None) == refused, why
        if refused:
            assert "x > 0" in why
        # |x| itself is right at every sign
        assert bench.unsigned_disagreement(dag.substitute(site.root, node, dag.call("abs", x)), idx, 1e-12,
                                           None) is None


def test_a_name_rebound_before_the_fix_is_never_written() -> None:
    # after `x = scale * 3.0`, `x` no longer holds the parameter the candidate log1p(x) is about
    src = """
        import math
        def h(x, scale):  # condhint: 1e-9 <= x <= 1e-6, 1 <= scale <= 2
            y = 1 + x
            x = scale * 3.0
            return math.log(y) * x
        """
    ma = analysed(src)
    _, node, _, writer, site = context_for(ma, "math.log(y)")
    x = next(n for n in _nodes(site.root) if n.kind == "input" and n.name == "x")
    with pytest.raises(codegen.Unspellable, match="another value"):
        writer.write(dag.call("log1p", x))
    kept = analysed(src.replace("            x = scale * 3.0\n", "            scale = scale * 3.0\n")
                    .replace("* x\n", "* scale\n"))
    _, node, _, writer, site = context_for(kept, "math.log(y)")
    x = next(n for n in _nodes(site.root) if n.kind == "input" and n.name == "x")
    assert writer.write(dag.call("log1p", x))[0] == "math.log1p(x)"


_nodes = topological

def test_a_fix_less_accurate_at_the_other_sign_is_not_offered() -> None:
    # The quadratic-root rewrite 2c / (-b - sqrt(b² - 4ac)) avoids cancellation for b > 0 and creates it for
    # b < 0 (Forsythe 1966; checked in binary64 against mpmath at a = 1, b = -1e4, c = 1: 0 vs 7 digits lost):
    # offered only where the code fixes b's sign.
    from condhint.fixing import attach_fixes

    src = """
        from math import sqrt
        def root(a, b, c):{decl}
            DD = b * b - 4.0 * a * c
            return (-b + sqrt(DD)) / 2.0 / a
        """
    unknown = analysed(src.format(decl=""))
    attach_fixes(unknown, Config())
    # Where b's sign is not fixed, only the branch on b's sign is offered: the conjugate where -b and sqrt(DD)
    # cancel (b > 0), the formula as written where they add up.
    offered = [x.replacement for f in unknown.report.findings for x in f.fixes]
    assert offered == ["-(4.0 * a * c) / (sqrt(DD) + b) if b > 0 else -b + sqrt(DD)"]
    declared = analysed(src.format(decl="  # condhint: 0.5 <= a <= 2, 1e3 <= b <= 1e5, 0.5 <= c <= 2"))
    attach_fixes(declared, Config())
    (f,) = declared.report.findings
    assert f.fixes and f.fixes[0].rule == "quadratic-root"


def test_calls_with_out_or_where_keywords_are_not_rewritten() -> None:
    # np.log(1 - p, out=…, where=1 - p >= 0) gives the out buffer's 0 where p > 1: log1p(-p) would give nan
    from condhint.fixing import attach_fixes

    src = "import numpy as np\ndef f(p, y):  # condhint: 1e-9 <= p <= 1e-6\n    return np.log(1 - p{kw}) * y\n"
    plain = analysed(src.format(kw=""))
    attach_fixes(plain, Config())
    assert [f.fixes[0].replacement for f in plain.report.findings] == ["np.log1p(-p)"]
    kept = analysed(src.format(kw=", out=np.zeros_like(p), where=1 - p >= 0"))
    attach_fixes(kept, Config())
    assert all(not f.fixes for f in kept.report.findings)


def test_no_math_rewrites_in_modules_that_handle_symbolic_values() -> None:
    # log(1 + x) → log1p(x) is right for floats; in a module importing sympy x may be a SymPy expression, which
    # math.log1p cannot take (a TypeError found on real code with the compound-power rule)
    from condhint.fixing import attach_fixes

    src = "{imp}import math\ndef f(x):  # condhint: 1e-9 <= x <= 1e-6\n    return math.log(1 + x)\n"
    floats = analysed(src.format(imp=""))
    attach_fixes(floats, Config())
    assert floats.report.findings and floats.report.findings[0].fixes
    symbolic = analysed(src.format(imp="import sympy\n"))
    attach_fixes(symbolic, Config())
    assert symbolic.report.findings and not symbolic.report.findings[0].fixes


@pytest.mark.parametrize("guard, offered", [("if rotation > 90:\n        return 0.0", False),
                                            ("if not 0 < rotation <= 90:\n        return 0.0", True)])
def test_a_fix_that_turns_a_finite_result_infinite_at_zero_is_not_offered(guard: str, offered: bool) -> None:
    # matplotlib's Text._get_dist_to_box (wrapped text, rotation = 0 by default): (y1 - y0) / cos(radians(90 - r)).
    # cos(fl(pi/2)) = 6.1e-17 in binary64 (the C library, checked below), so the original is finite at r = 0;
    # the rewrite with sin(pi*r/180) divides by an exact 0 and gives inf. Where the code allows r = 0 the rewrite
    # changes what the code computes beyond rounding; where it establishes r > 0 it is right (and more accurate).
    import math
    assert math.cos(math.radians(90)) != 0.0 and math.sin(math.pi * 0 / 180) == 0.0
    src = ("import math\n\ndef dist(rotation, y0, y1):\n    " + guard + "\n"
           "    return (y1 - y0) / math.cos(math.radians(90 - rotation))\n")
    from condhint.fixing import attach_fixes

    ma = analysed(src)
    attach_fixes(ma, Config())
    fixes = [x.replacement for f in ma.report.findings for x in f.fixes]
    assert any("math.sin(math.pi * rotation / 180)" in r for r in fixes) is offered, fixes


def test_a_series_switches_where_its_truncation_is_checked_not_at_a_round_number_past_it() -> None:
    # arctan(x) - x by its Taylor series to x**15 (terms (-1)^k x^(2k+1)/(2k+1), k ≥ 1; DLMF 4.24.3). The first
    # omitted term, x**17/17, is 1e-18.2 relative at x = 0.1 — about 8 ulp, more than the quarter ulp a series fix
    # may differ by (skyfield's test_positions.py:201 was offered the switch |x| < 0.1). The switch is checked at
    # the round number itself, against mpmath, and moves down until it holds.
    from fractions import Fraction

    import mpmath

    from condhint.expr import INPUT, Node
    from condhint.numeric.evaluate import Deadline
    from condhint.rewrites.search import SERIES_VAR, _checked_cut

    x = Node(INPUT, name=SERIES_VAR, text=SERIES_VAR)
    local = dag.sub(dag.call("atan", x), x)
    terms = [(Fraction((-1) ** k, 2 * k + 1), 2 * k + 1) for k in range(1, 8)]
    u = 2.0 ** -53

    def within(cut: float) -> bool:
        with mpmath.workdps(60):
            c = mpmath.mpf(cut)
            exact = mpmath.atan(c) - c
            series = mpmath.fsum(mpmath.mpf(q.numerator) / q.denominator * c ** k for q, k in terms)
            return abs((series - exact) / exact) <= u / 4

    assert not within(0.1)  # what a round number below the coarse grid's first bad point gave
    cut = _checked_cut(local, terms, 0.19457941426664335, [1.0, -1.0], u / 4, Deadline(10.0))
    assert cut is not None and cut < 0.1 and within(cut)
