"""Maclaurin polynomials by truncated Laurent series (`rewrites/laurent.py`): the coefficients against mpmath's
numerical Taylor coefficients (mpmath.taylor at 50 digits) and against published series; what it refuses."""
from __future__ import annotations

import mpmath
import pytest
import sympy as sp

from condhint.rewrites.laurent import NoSeries, maclaurin

x = sp.Symbol("x", positive=True)
k = sp.log(1 + x)

# Formulas whose terms have poles at 0 (or cancel to high order) and their binary64-free mpmath twins.
CASES = {
    "1 - (x/2)/tan(x/2)": (1 - sp.Rational(1, 2) * x / sp.tan(x / 2), lambda t: 1 - (t / 2) / mpmath.tan(t / 2)),
    "k/2 - log(x/k), k = log(1 + x)": (k / 2 - sp.log(x / k),
                                       lambda t: mpmath.log(1 + t) / 2 - mpmath.log(t / mpmath.log(1 + t))),
    "(-1/x + 3/x**3) sin x - 3 cos(x)/x**2": ((-1 / x + 3 / x**3) * sp.sin(x) - 3 / x**2 * sp.cos(x),
                                              lambda t: (-1 / t + 3 / t**3) * mpmath.sin(t) - 3 / t**2 * mpmath.cos(t)),
    "1/x - 1/tan x": (1 / x - 1 / sp.tan(x), lambda t: 1 / t - 1 / mpmath.tan(t)),
    "sqrt(4 + x) - 2": (sp.sqrt(4 + x) - 2, lambda t: mpmath.sqrt(4 + t) - 2),
    "log(cos x)": (sp.log(sp.cos(x)), lambda t: mpmath.log(mpmath.cos(t))),
    "atanh(x) - asinh(x)": (sp.atanh(x) - sp.asinh(x), lambda t: mpmath.atanh(t) - mpmath.asinh(t)),
}


@pytest.mark.parametrize("name", CASES)
def test_coefficients_match_mpmath_taylor(name):
    expr, f = CASES[name]
    poly = sp.Poly(maclaurin(expr, x, 9), x)
    with mpmath.workdps(50):
        # The formulas have removable singularities at 0: differentiate from points beside it.
        numeric = mpmath.taylor(f, 0, 8, singular=True)
    for power in range(9):
        exact = poly.coeff_monomial(x**power)
        assert abs(float(exact) - float(numeric[power])) <= 1e-25 + 1e-15 * abs(float(numeric[power])), power


def test_published_series():
    # DLMF 10.53.1 (j₂(x) = x²/15 − x⁴/210 + …) and the Bernoulli-number series of (x/2)cot(x/2) (DLMF 4.19.6:
    # x cot x = 1 − x²/3 − x⁴/45 − …, so 1 − (x/2)cot(x/2) = x²/12 + x⁴/720 + x⁶/30240 + …).
    j2 = CASES["(-1/x + 3/x**3) sin x - 3 cos(x)/x**2"][0]
    assert maclaurin(j2, x, 6) == x**2 / 15 - x**4 / 210
    half_cot = CASES["1 - (x/2)/tan(x/2)"][0]
    assert maclaurin(half_cot, x, 7) == x**2 / 12 + x**4 / 720 + x**6 / 30240


def test_cancellation_beyond_the_first_working_order_is_followed():
    # (sin x − its first five Taylor terms)/x¹¹ is −1/11! + x²/13! − …: every known term of the numerator
    # below x¹¹ cancels, which takes more than the first working order's slack.
    tail = (sp.sin(x) - x + x**3 / 6 - x**5 / 120 + x**7 / 5040 - x**9 / 362880) / x**11
    assert maclaurin(tail, x, 3) == -sp.Rational(1, 39916800) + x**2 / 6227020800


@pytest.mark.parametrize("expr, why", [
    (sp.sqrt(x), "branch point"),
    (1 / x, "pole"),
    (sp.log(2 + x), "log of a value that is not 1"),
    (sp.exp(1 + x), "not 0 at 0"),
    (sp.Float(0.5) * x, "inexact constant"),
    (sp.sin(sp.pi * x) - sp.pi * x, "irrational"),
    (sp.sqrt(3 + x), "irrational coefficient"),
    (x * sp.Symbol("y"), "more than one variable"),
    (sp.erf(x), "erf"),
])
def test_refused_with_a_reason(expr, why):
    with pytest.raises(NoSeries, match=why):
        maclaurin(expr, x, 6)


def test_the_search_falls_back_to_sympy_only_for_functions_it_lacks():
    # A Bessel function (DLMF 10.2.2: J₀(x) = 1 − x²/4 + x⁴/64 − …) goes on to sympy's `series`; √(3 + x)
    # has no Maclaurin polynomial with rational coefficients, which needs no second opinion (sympy's series
    # of it takes most of a second).
    from condhint.rewrites.laurent import Unsupported
    from condhint.rewrites.search import _maclaurin

    with pytest.raises(Unsupported):
        maclaurin(sp.besselj(0, x), x, 6)
    assert sp.expand(_maclaurin(sp.besselj(0, x), x, 6)) == 1 - x**2 / 4 + x**4 / 64
    assert _maclaurin(1 - 96 * x + 24 * x * sp.sqrt(3 + 144 * x), x, 8) is None
    # A variable exponent goes on too: (1 + x)**x = 1 + x² − x³/2 + 5x⁴/6 − … (mpmath.taylor at 50 digits)
    poly = sp.Poly(_maclaurin((1 + x) ** x, x, 5), x)
    with mpmath.workdps(50):
        numeric = mpmath.taylor(lambda t: (1 + t) ** t, 0, 4)
    assert all(abs(float(poly.coeff_monomial(x**k)) - float(numeric[k])) < 1e-25 for k in range(5))
