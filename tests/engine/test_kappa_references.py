"""κ computed by condhint against published or derivable closed forms (references named per case)."""
from __future__ import annotations

import math

import mpmath
import pytest
import sympy

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.numeric.analysis import analyse


def kappa_at(expr: str, point: dict[str, float], imports: str = "import math") -> tuple[float, dict[str, float]]:
    """κ and κᵢ of `expr` at a single point (each input's declared range is that point)."""
    params = ", ".join(point)
    ranges = ", ".join(f"{k} in [{v!r}, {v!r}]" for k, v in point.items())
    src = f"{imports}\ndef f({params}):  # condhint: {ranges}\n    return {expr}\n"
    mod = analyse_module(src, "t.py", Config(), cache=None)
    (site,) = mod.sites
    a = analyse(site, Config())
    return a.kappa, a.kappa_i


CASES = [
    # (expression, point, closed form of κ, source)
    ("x**2", 3.7, lambda x: 2.0, "x^p: |p| (common practice; Higham 2002)"),
    ("x*x", 0.01, lambda x: 2.0, "x^2 via a product: 2 (common practice)"),
    ("math.sqrt(x)", 12.5, lambda x: 0.5, "sqrt: 1/2 (common practice)"),
    ("math.exp(x)", 7.25, lambda x: abs(x), "exp: |x| (derivable; Higham 2002)"),
    ("math.exp(x)", -30.0, lambda x: abs(x), "exp: |x| (derivable; Higham 2002)"),
    ("math.log(x)", 1.001, lambda x: 1 / abs(math.log(x)), "log: 1/|log x| (derivable; Higham 2002)"),
    ("math.log(x)", 250.0, lambda x: 1 / abs(math.log(x)), "log: 1/|log x| (derivable; Higham 2002)"),
    ("math.sin(x)", 3.0, lambda x: abs(x / math.tan(x)), "sin: |x cot x| (derivable; common practice)"),
    ("math.cos(x)", 1.5, lambda x: abs(x * math.tan(x)), "cos: |x tan x| (derivable; common practice)"),
    ("math.tan(x)", 1.55, lambda x: abs(2 * x / math.sin(2 * x)), "tan: |2x / sin 2x| (derivable)"),
    ("x - 3.0", 3.01, lambda x: abs(x / (x - 3.0)), "x - c: |x / (x - c)| (common practice)"),
]


@pytest.mark.parametrize("expr,x,closed,source", CASES, ids=[f"{c[0]}@{c[1]}" for c in CASES])
def test_kappa_of_elementary_functions(expr, x, closed, source):
    kappa, _ = kappa_at(expr, {"x": x})
    assert kappa == pytest.approx(closed(x), rel=1e-6), source


@pytest.mark.parametrize("a,b,c", [(1.0, -3.0, 2.0), (2.0, 5.0, 1.0), (1.0, -2.0, 0.999)])
def test_kappa_of_quadratic_root_with_respect_to_a(a, b, c):
    # κ of a root t1 of a t^2 + b t + c with respect to a is |t1 / (t1 - t2)|: derivable by implicit
    # differentiation (common practice); close roots (the third case) are sensitive.
    kappa, kappa_i = kappa_at("(-b + math.sqrt(b*b - 4*a*c)) / (2*a)", {"a": a, "b": b, "c": c})
    with mpmath.workdps(50):
        d = mpmath.sqrt(mpmath.mpf(b) ** 2 - 4 * mpmath.mpf(a) * c)
        t1 = (-b + d) / (2 * a)
        t2 = (-b - d) / (2 * a)
        expected = float(abs(t1 / (t1 - t2)))
    assert kappa_i["a"] == pytest.approx(expected, rel=1e-6)


def test_kappa_of_a_sum_is_componentwise():
    # Componentwise κ of a sum: Σ|xᵢ| / |Σ xᵢ| (Higham 2002, chapter on summation).
    kappa, kappa_i = kappa_at("x + y + z", {"x": 1.5, "y": -0.75, "z": 0.125})
    assert kappa == pytest.approx((1.5 + 0.75 + 0.125) / abs(1.5 - 0.75 + 0.125), rel=1e-9)


def test_kappa_is_exact_even_where_binary64_derivatives_cancel():
    # sqrt(x+1) - sqrt(x) has κ = x / (2 sqrt(x) sqrt(x+1)) → 1/2 for large x (derivable; mpmath at 60 digits).
    kappa, _ = kappa_at("math.sqrt(x + 1) - math.sqrt(x)", {"x": 1e12})
    with mpmath.workdps(60):
        x = mpmath.mpf(1e12)
        expected = float(x / (2 * mpmath.sqrt(x) * mpmath.sqrt(x + 1)))
    assert kappa == pytest.approx(expected, rel=1e-6)


def test_kappa_of_any_subexpression_over_the_site_inputs():
    # Each node is a function of the site's inputs: κ of the subexpression sqrt(x + 1) is
    # x / (2 (x + 1)) (derivable; common practice), evaluated over the site's declared range.
    src = "import math\ndef f(x):  # condhint: x in [3.0, 3.0]\n    return math.sqrt(x + 1) - math.sqrt(x)\n"
    mod = analyse_module(src, "t.py", Config(), cache=None)
    (site,) = mod.sites
    sub = site.root.args[0]
    assert sub.text == "math.sqrt(x + 1)"
    a = analyse(site, Config(), root=sub)
    assert a.kappa == pytest.approx(3.0 / (2 * 4.0), rel=1e-9)


def test_sites_the_reference_clears_keep_their_figures(monkeypatch) -> None:
    # A long same-sign sum: its first-order error bound predicts about two digits at risk, so it is
    # re-evaluated in mpmath, which shows the loss stays below a digit. Then no finding is possible and the
    # mpmath reverse pass is skipped; κ must still be that of f = c·x (exactly 1, common practice) and
    # every figure the same as when the reverse pass runs.
    from condhint.numeric import analysis

    terms = " + ".join(f"x * {k}.5 + y * {k}.25" for k in range(150))
    src = f"def f(x, y):  # condhint: 1 <= x <= 2, 1 <= y <= 3\n    return {terms}\n"
    (site,) = analyse_module(src, "t.py", Config(), cache=None).sites
    settled = analysis._settled
    verdicts: list[bool] = []
    monkeypatch.setattr(analysis, "_settled", lambda *args: verdicts.append(settled(*args)) or verdicts[-1])
    quick = analyse(site, Config())
    assert verdicts == [True]  # the shortcut was taken
    monkeypatch.setattr(analysis, "_settled", lambda *args: False)
    full = analyse(site, Config())
    assert quick.refined and full.refined
    assert quick.category is None and full.category is None
    assert 1.0 <= quick.predicted and quick.measured < Config().thresholds.info
    # κ of a·x + b·y with positive a, b, x, y is 1 (the sum of κ_x and κ_y); mpmath gives the same.
    assert quick.kappa == pytest.approx(1.0, rel=1e-12) and full.kappa == pytest.approx(1.0, rel=1e-12)
    assert quick.kappa_i.keys() == full.kappa_i.keys()
    for name in quick.kappa_i:
        assert quick.kappa_i[name] == pytest.approx(full.kappa_i[name], rel=1e-9)
    assert quick.measured == full.measured


SYMBOLIC = CASES + [
    ("math.sqrt(x + 1) - math.sqrt(x)", 1e6, lambda x: x / (2 * math.sqrt(x) * math.sqrt(x + 1)),
     "sqrt(x+1) - sqrt(x): x / (2 sqrt(x) sqrt(x+1)) (derivable)"),
    ("math.exp(x) - 1", 1e-3, lambda x: abs(x * math.exp(x) / math.expm1(x)), "exp(x) - 1: |x eˣ / (eˣ - 1)| (derivable)"),
    ("(1 + x / 12.0) ** (12.0 * 30.0)", 0.05,
     lambda x: abs(360.0 * (x / 12.0) / (1 + x / 12.0)), "(1 + r/n)^(n t) w.r.t. r: n t (r/n)/(1 + r/n) (derivable)"),
]


@pytest.mark.parametrize("expr,x,closed,source", SYMBOLIC, ids=[f"{c[0]}@{c[1]}" for c in SYMBOLIC])
def test_the_symbolic_kappa_formula_agrees_with_closed_forms(expr, x, closed, source):
    # The formula shown in hover and JSON, evaluated at the point (sympy's evalf at 30 digits).
    from condhint.symbolic import kappa_expression, to_sympy

    src = f"import math\ndef f(x):  # condhint: x in [{x!r}, {x!r}]\n    return {expr}\n"
    (site,) = analyse_module(src, "t.py", Config(), cache=None).sites
    sym, symbols = to_sympy(site.root, {"x"} if x > 0 else set())
    k = kappa_expression(sym, symbols)
    value = float(k.evalf(30, subs={symbols["x"]: x}))
    assert value == pytest.approx(closed(x), rel=1e-9), source


@pytest.mark.parametrize("expr, shown, written", [
    # x/(2 sqrt(x) sqrt(x+1)) and (2x + 1)/(x + 1), derivable by hand
    ("math.sqrt(x + 1) - math.sqrt(x)", "sqrt(x)/(2*sqrt(x + 1))", lambda x: sympy.sqrt(x) / (2 * sympy.sqrt(x + 1))),
    ("1.0 / x - 1.0 / (x + 1)", "(2*x + 1)/(x + 1)", lambda x: (2 * x + 1) / (x + 1)),
])
def test_the_displayed_kappa_formula_is_simplified_and_equal_to_sympys_own(expr, shown, written):
    # Issue 18: hover and JSON show κ the way a person would write it (`written`, built here as sympy objects,
    # never parsed from text), and that is the same function as the raw |x ∂f/∂x / f| sympy computes.
    from condhint.symbolic import kappa_formula_text, to_sympy

    src = f"import math\ndef f(x):  # condhint: 1 <= x <= 1e6\n    return {expr}\n"
    (site,) = analyse_module(src, "t.py", Config(), cache=None).sites
    assert kappa_formula_text(site.root, {"x"}) == shown
    sym, symbols = to_sympy(site.root, {"x"})
    x = symbols["x"]
    assert sympy.sstr(written(x)) == shown
    difference = written(x) - abs(x * sympy.diff(sym, x) / sym)
    assert sympy.simplify(difference) == 0 or all(
        abs(float(difference.evalf(30, subs={x: v}))) < 1e-20 for v in (1.5, 10.0, 1e3, 1e6))


def test_a_term_shared_by_two_formulas_is_simplified_once_and_reads_the_same():
    # κ of sqrt(x + 1) - sqrt(x) w.r.t. x is the term sqrt(x)/(2*sqrt(x + 1)); the second function has it too.
    from condhint.symbolic import _shortest, kappa_formula_text

    src = ("import math\ndef f(x):  # condhint: 1 <= x <= 1e6\n    return math.sqrt(x + 1) - math.sqrt(x)\n"
           "def g(x, y):  # condhint: 1 <= x <= 1e6; 1 <= y <= 2\n"
           "    return (math.sqrt(x + 1) - math.sqrt(x)) * y\n")
    f_site, g_site = analyse_module(src, "t.py", Config(), cache=None).sites
    _shortest.cache_clear()
    alone = kappa_formula_text(g_site.root, {"x", "y"})
    _shortest.cache_clear()
    kappa_formula_text(f_site.root, {"x"})
    hits = _shortest.cache_info().hits
    assert kappa_formula_text(g_site.root, {"x", "y"}) == alone == "sqrt(x)/(2*sqrt(x + 1)) + 1"
    assert _shortest.cache_info().hits > hits


def test_a_formula_too_long_to_read_is_not_written():
    # scipy.signal's smoothing-spline pole (`_coeff_smooth`, its statements as written there): κ of the radius
    # has a cancelled term of about 1,500 characters, which no reader can use, and the finding keeps κ's
    # value; the angle's formula is short and unaffected.
    from condhint.engine import kappa_formula
    from condhint.symbolic import TERM_UP_TO, TooLong, kappa_formula_text

    src = ("import math\ndef pole(lam):  # condhint: 1e-6 <= lam <= 1e6\n"
           "    xi = 1 - 96 * lam + 24 * lam * math.sqrt(3 + 144 * lam)\n"
           "    omeg = math.atan2(math.sqrt(144 * lam - 1), math.sqrt(xi))\n"
           "    rho = (24 * lam - 1 - math.sqrt(xi)) / (24 * lam)\n"
           "    rho = rho * math.sqrt((48 * lam + 24 * lam * math.sqrt(3 + 144 * lam)) / xi)\n"
           "    return rho, omeg\n")
    sites = analyse_module(src, "t.py", Config(), cache=None).sites
    radius = next(s for s in sites if s.root.text.startswith("rho"))
    angle = next(s for s in sites if s.root.text.startswith("math.atan2"))
    with pytest.raises(TooLong, match="too long to read"):
        kappa_formula_text(radius.root, {"lam"})
    assert kappa_formula(radius, Config()) is None
    assert len(kappa_formula_text(angle.root, {"lam"})) < TERM_UP_TO
