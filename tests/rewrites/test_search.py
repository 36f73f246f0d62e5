"""The general search: sympy transformations where no named rule covers, and Taylor branches for small
arguments where no closed form removes the loss. Accuracy is measured here against mpmath (60 digits)."""
from __future__ import annotations

import math
import re
from fractions import Fraction

import mpmath
import numpy as np

from condhint.rewrites.search import series_node, series_variable
from tests.rewrites.support import analysed, best_fix, digits_lost, site_with, worst_loss


def _taylor_x_minus_sin(x: float, terms: int) -> float:
    """x − sin x = Σ_{k≥1} (−1)^(k+1) x^(2k+1)/(2k+1)! (NIST DLMF ch. 4, Maclaurin series of sin)."""
    return sum((-1) ** (k + 1) * x ** (2 * k + 1) / math.factorial(2 * k + 1) for k in range(1, terms + 1))


def test_series_for_theta_minus_sin_on_a_small_range():
    src = """
    from math import sin
    def wetted(radius, theta):  # condhint: 0.1 <= radius <= 2
        if theta <= 0 or theta > 0.01:
            raise ValueError
        return 0.5 * radius * radius * (theta - sin(theta))
    """
    fix = best_fix(src)
    assert fix.rule == "series"
    # The Taylor series of sin, three terms (NIST DLMF ch. 4): exact to < u/4 relative for θ ≤ 0.01.
    assert fix.replacement == "theta ** 3 / 6 - theta ** 5 / 120 + theta ** 7 / 5040"
    pts = [(float(t),) for t in np.geomspace(1e-12, 0.01, 40)]
    exact = lambda t: t - mpmath.sin(t)  # noqa: E731
    assert worst_loss(lambda t: t - math.sin(t), exact, pts) >= 15
    assert worst_loss(lambda t: _taylor_x_minus_sin(t, 3), exact, pts) <= 0.6


def test_series_branch_switches_at_a_measured_point():
    src = "import math\ndef f(x):  # condhint: 1e-8 <= x <= 3\n    return x - math.sin(x)\n"
    fix = best_fix(src)
    m = re.fullmatch(r"(?P<series>.*) if abs\(x\) < (?P<cut>[0-9.e-]+) else x - math\.sin\(x\)", fix.replacement)
    assert m, fix.replacement
    cut = float(m["cut"])
    terms = m["series"].count("x **")
    assert 1e-3 <= cut <= 3 and terms >= 2
    # Our own implementation of the offered branch, measured over the whole range.
    stable = lambda x: _taylor_x_minus_sin(x, terms) if abs(x) < cut else x - math.sin(x)  # noqa: E731
    pts = [(float(t),) for t in np.geomspace(1e-8, 3, 80)]
    exact = lambda x: x - mpmath.sin(x)  # noqa: E731
    assert worst_loss(lambda x: x - math.sin(x), exact, pts) >= 15
    assert worst_loss(stable, exact, pts) <= 1.0


def test_series_in_a_compound_argument_keeps_its_text():
    src = "import math\ndef f(x, y):  # condhint: 1e-5 <= x <= 1e-3, 1e-5 <= y <= 1e-3\n    return x*y - math.sin(x*y)\n"
    fix = best_fix(src)
    assert fix.rule == "series" and fix.replacement.startswith("(x*y) ** 3 / 6 - (x*y) ** 5 / 120")


def test_series_variable_is_the_argument_every_input_goes_through():
    ma = analysed("import math\ndef f(x, y):\n    return math.exp(x * y) - 1 - x * y\n")
    site, node = site_with(ma, "math.exp(x * y) - 1 - x * y")
    assert series_variable(node).text == "x * y"
    ma = analysed("import math\ndef f(x, y):\n    return math.exp(x) - 1 - y\n")
    site, node = site_with(ma, "math.exp(x) - 1 - y")
    assert series_variable(node) is None


def test_series_terms_are_written_leading_term_first():
    from condhint.expr import INPUT, Node
    from condhint.rewrites.codegen import Emitter, Spelling, Style

    u = Node(INPUT, name="t", text="t")
    node = series_node([(Fraction(1, 2), 0), (Fraction(-1, 6), 1), (Fraction(3, 40), 2)], u)
    text, _ = Emitter(Spelling(Style(), "math", False), lambda n: None, {}).text(node)
    assert text == "0.5 - t / 6 + 3 * t ** 2 / 40"


def test_sympy_expansion_where_no_named_rule_covers():
    src = "def f(x):  # condhint: 1e5 <= x <= 1e7\n    return (x + 1)**3 - x**3\n"
    fix = best_fix(src)
    assert fix.rule.startswith("sympy-") and fix.replacement == "3 * x ** 2 + 3 * x + 1"
    pts = [(float(v),) for v in np.geomspace(1e5, 1e7, 30)]
    exact = lambda x: (x + 1) ** 3 - x ** 3  # noqa: E731  (mpmath at 60 digits)
    assert worst_loss(lambda x: (x + 1) ** 3 - x ** 3, exact, pts) >= 4
    assert worst_loss(lambda x: 3 * x ** 2 + 3 * x + 1, exact, pts) <= 0.7


def test_sympy_trigonometric_simplification():
    # cos²x − sin²x = cos 2x (NIST DLMF ch. 4, double-angle formula); factoring it as a difference of squares
    # does not help (cos x − sin x cancels just as much) and is rejected by measurement.
    src = "import math\ndef f(x):  # condhint: 0.78 <= x <= 0.79\n    return math.cos(x)**2 - math.sin(x)**2\n"
    fix = best_fix(src)
    assert (fix.rule, fix.replacement) == ("sympy-trigsimp", "math.cos(2 * x)")
    pts = [(float(v),) for v in np.linspace(0.78, 0.79, 41)] + [(math.pi / 4,)]
    exact = lambda x: mpmath.cos(x) ** 2 - mpmath.sin(x) ** 2  # noqa: E731
    assert worst_loss(lambda x: math.cos(x) ** 2 - math.sin(x) ** 2, exact, pts) >= 4
    assert worst_loss(lambda x: math.cos(2 * x), exact, pts) <= 0.5


def test_sympy_finds_the_square_inside_a_root():
    # sqrt(x² − 2xy + y²) = |x − y| (common practice); the expanded square cancels for x ≈ y.
    src = "import math\ndef f(x, y):  # condhint: 1 <= x <= 1.0001, 1 <= y <= 1.0001\n" \
          "    return math.sqrt(x * x - 2 * x * y + y * y)\n"
    fix = best_fix(src)
    assert fix.replacement == "abs(x - y)" and fix.title == "Rewrite as `abs(x - y)` (sympy together)"
    pts = [(1 + a * 1e-5, 1 + b * 1e-5 + 1e-12) for a in range(0, 10, 3) for b in range(0, 10, 3)]
    exact = lambda x, y: mpmath.sqrt(x * x - 2 * x * y + y * y)  # noqa: E731
    before = worst_loss(lambda x, y: math.sqrt(max(x * x - 2 * x * y + y * y, 0.0)), exact, pts)
    assert before >= 4 and worst_loss(lambda x, y: abs(x - y), exact, pts) <= 0.3


def test_maclaurin_polynomial_of_a_polynomial_in_log1p_matches_mpmath():
    # The numerator of a Bradford-type kurtosis: a polynomial in c and k = log(1 + c) whose terms cancel up to
    # c**7. The ring series gives it in a fraction of sympy's `series` time; its coefficients are checked
    # against mpmath's numerical Taylor coefficients (mpmath.taylor, 50 digits).
    import sympy as sp

    from condhint.rewrites.search import _maclaurin

    c = sp.Symbol("c", positive=True)
    k = sp.log(1 + c)
    expr = c**3*(k-3)*(k*(3*k-16)+24) + 12*k*c*c*(k-4)*(k-3) + 6*c*k*k*(3*k-14) + 12*k**3
    poly = sp.Poly(_maclaurin(expr, c, 12), c)
    with mpmath.workdps(50):
        def f(x):
            kk = mpmath.log(1 + x)
            return x**3*(kk-3)*(kk*(3*kk-16)+24) + 12*kk*x*x*(kk-4)*(kk-3) + 6*x*kk*kk*(3*kk-14) + 12*kk**3
        numeric = mpmath.taylor(f, 0, 11)
    for power in range(12):
        exact = poly.coeff_monomial(c**power)
        assert abs(float(exact) - float(numeric[power])) <= 1e-20 + 1e-12 * abs(float(numeric[power])), power
    assert poly.coeff_monomial(c**7) == sp.Rational(-1, 10)
    assert all(poly.coeff_monomial(c**p) == 0 for p in range(7))


def test_maclaurin_falls_back_where_the_ring_series_gives_no_polynomial():
    import sympy as sp

    from condhint.rewrites.search import _maclaurin

    u = sp.Symbol("u", positive=True)
    # 1 − 2u + 2u² − … (geometric series, from memory); the ring series returns (1 − u)/(1 + u) unexpanded
    assert sp.expand(_maclaurin((1 - u) / (1 + u), u, 4)) == 1 - 2*u + 2*u**2 - 2*u**3


def test_a_series_that_leaves_part_of_the_loss_is_offered_and_measured():
    # An invented entropy of the form k/2 − log(c/k), k = log(1 + c): both terms are near c/2 for small c. A
    # Maclaurin series in c can only cover |c| < 1 (log(1 + c) has its singularity at −1), and beyond its
    # switch point the formula as written still loses some digits: the fix is kept because it makes the
    # loss smaller by far, and the finding stays with what is left.
    from tests.trust.mp_eval import f64_value

    src = ("import numpy as np\n"
           "def entropy(c):  # condhint: 1e-8 <= c <= 10\n"
           "    k = np.log(1.0 + c)\n"
           "    return k/2.0 - np.log(c/k)\n")
    fix = best_fix(src)
    assert fix.rule == "series"
    m = re.fullmatch(r"np\.where\(abs\(c\) < (?P<cut>[0-9.e-]+), (?P<series>.*), k/2\.0 - np\.log\(c/k\)\)",
                     fix.replacement)
    assert m, fix.replacement
    assert 1e-3 <= float(m["cut"]) <= 0.5
    # −c²/24 + c³/24 − …: the leading terms by hand (log(1 + c) = c − c²/2 + c³/3 − …, NIST DLMF 4.6.1)
    assert m["series"].startswith("-(c ** 2 / 24) + c ** 3 / 24")

    def exact(c: float) -> mpmath.mpf:
        k = mpmath.log1p(mpmath.mpf(c))
        return k / 2 - mpmath.log(mpmath.mpf(c) / k)

    pts = [float(t) for t in np.geomspace(1e-8, 10, 60)]
    binding = {"k": "np.log(1.0 + c)"}
    with mpmath.workdps(60):
        before = max(digits_lost(f64_value("k/2.0 - np.log(c/k)", {"c": c}, binding), exact(c)) for c in pts)
        after = max(digits_lost(f64_value(fix.replacement, {"c": c}, binding), exact(c)) for c in pts)
    assert before >= 12 and after <= before - 6, (before, after)
