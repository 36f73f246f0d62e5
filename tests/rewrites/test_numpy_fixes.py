"""Fixes in numpy code: names bound to opaque values, reductions as inputs of elementwise formulas, choices
written as `np.where` (which evaluates both branches), and Taylor branches whose switch leaves no loss.

Every fix is measured here once more, as a Python formula written in the test, against mpmath at 60 digits.
"""
from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import sympy

from condhint.config import Config
from condhint.rewrites.scalar_view import scalar_view
from tests.rewrites.support import analysed, best_fix, fixes_of, site_with, worst_loss


def _half_angle(x: float) -> float:
    """1 − cos x = 2 sin²(x/2) (NIST DLMF ch. 4, half-angle formula)."""
    return 2 * math.sin(x / 2) ** 2


def _series(terms: list[tuple[Fraction, int]], x: float) -> float:
    return sum(float(c) * x ** k for c, k in terms)


def _written(terms: list[tuple[Fraction, int]], u: str) -> str:
    """The series as the fix writes it: `u ** 3 / 6 - u ** 5 / 120 + …` (a constant term as `1 / 12`)."""
    out = ""
    for i, (c, k) in enumerate(terms):
        a = abs(c)
        base = f"{u} ** {k}" if k else "1"
        text = (f"{a.numerator} * {base}" if a.numerator != 1 else base) + f" / {a.denominator}"
        out += ("-" if c < 0 else "") + text if i == 0 else (" - " if c < 0 else " + ") + text
    return out


def _branch(text: str, where: str, orig: str) -> tuple[float, str]:
    """(switch, series text) of `where(abs(u) < switch, series, orig)`."""
    head = f"{where}(abs("
    assert text.startswith(head) and text.endswith(f", {orig})"), text
    switch, series = text[len(head):-len(orig) - 3].split(", ", 1)
    return float(switch.split(" < ")[1]), series


# ---- a name bound to an opaque value holds that value after its own assignment --------------------------------
NORM_MASK = """
import numpy as np


def rotvec_rate_factor(norms, mask):  # condhint: 1e-9 <= nm <= 1e-2
    nm = norms[mask]
    return (1 - np.cos(nm)) / nm ** 2
"""


def test_a_name_bound_to_a_subscript_is_spelled_by_the_fix():
    # `nm = norms[mask]` (scipy's rotation splines) binds `nm`; the fix on the next line may write `nm`.
    fix = best_fix(NORM_MASK)
    assert (fix.rule, fix.replacement, fix.imports) == ("one-minus-cos", "2 * np.sin(nm / 2) ** 2", [])
    pts = [(float(t),) for t in np.geomspace(1e-9, 1e-2, 60)]
    exact = lambda x: 1 - mpmath.cos(x)  # noqa: E731
    assert worst_loss(lambda x: 1 - math.cos(x), exact, pts) >= 15
    assert worst_loss(_half_angle, exact, pts) <= 0.6


def test_must_not_fire_a_name_rebound_after_its_value_was_taken():
    # `y` holds cos of the parameter; `x` is rebound before `1 - y`: `2 * np.sin(x / 2) ** 2` would use 2x.
    src = ("import numpy as np\n\n\ndef moved(x):  # condhint: 1e-9 <= x <= 1e-2\n"
           "    y = np.cos(x)\n    x = 2.0 * x\n    return 1 - y\n")
    finding, fixes, _ = fixes_of(src)
    assert finding.expression == "1 - y" and not any("x" in f.replacement for f in fixes)


# ---- reductions as inputs ------------------------------------------------------------------------------------
ROTVEC = """
import numpy as np


def rotvec_coefficient(rotvec):  # condhint: 1e-9 <= rotvec <= 1e-1, len(rotvec) == 3
    theta = np.linalg.norm(rotvec)
    return (1 - np.cos(theta)) / theta ** 2
"""


def test_an_elementwise_formula_of_a_reduction_gets_the_scalar_rules():
    fix = best_fix(ROTVEC)
    assert (fix.rule, fix.replacement, fix.imports) == ("one-minus-cos", "2 * np.sin(theta / 2) ** 2", [])
    assert fix.measured_digits_lost_before >= 14 and fix.measured_digits_lost_after <= 1
    # θ = |v| of vectors with elements in [1e-9, 0.1]: θ in [1.7e-9, 0.18]
    pts = [(float(t),) for t in np.geomspace(1.7e-9, 0.18, 60)]
    exact = lambda t: 1 - mpmath.cos(t)  # noqa: E731
    assert worst_loss(lambda t: 1 - math.cos(t), exact, pts) >= 15
    assert worst_loss(_half_angle, exact, pts) <= 0.6


def test_the_reduction_result_is_an_input_with_the_range_of_its_sampled_values():
    ma = analysed(ROTVEC)
    site, _ = site_with(ma, "(1 - np.cos(theta)) / theta ** 2")
    view, _ = scalar_view(site, Config())
    (r,) = [view.ranges[k] for k in ("np.linalg.norm(rotvec)",)]
    assert r.source == "reduction" and 1e-9 <= r.interval.low and r.interval.high <= math.sqrt(3) * 0.1


def test_a_guard_on_the_reduction_result_filters_the_view_samples():
    # scipy's pattern: the formula runs only where θ ≥ 1e-4, so its worst measured loss is 1 − cos(1e-4)'s, about
    # 8 digits, not the 15.6 of θ near 1e-9 (the guard is a condition on the reduction, kept in the view).
    src = ROTVEC.replace("    return (1", "    if theta < 1e-4:\n        return 0.5 - theta ** 2 / 24\n    return (1")
    fix = best_fix(src)
    assert (fix.rule, fix.replacement) == ("one-minus-cos", "2 * np.sin(theta / 2) ** 2")
    with mpmath.workdps(60):
        at_guard = worst_loss(lambda t: 1 - math.cos(t), lambda t: 1 - mpmath.cos(t), [(1e-4,)])
    assert abs(fix.measured_digits_lost_before - at_guard) < 0.5 and fix.measured_digits_lost_after <= 1


def test_must_not_fire_no_scalar_view_of_two_reductions_of_one_array():
    # mean(x²) and mean(x)² are not independent inputs: sampling them apart would measure what never occurs.
    ma = analysed("import numpy as np\n\n\ndef raw_var(x):\n    return np.mean(x ** 2) - np.mean(x) ** 2\n")
    site, _ = site_with(ma, "np.mean(x ** 2) - np.mean(x) ** 2")
    assert scalar_view(site, Config()) is None
    # and the array rule still gives its fix
    fix = best_fix("import numpy as np\n\n\ndef raw_var(x):  # condhint: 1e3 <= x <= 1e3 + 1\n"
                   "    return np.mean(x ** 2) - np.mean(x) ** 2\n")
    assert (fix.rule, fix.replacement) == ("two-pass-variance", "np.var(x)")


# ---- choices written as numpy's where ------------------------------------------------------------------------
SINC_EXCESS = "def sinc_excess(theta):  # condhint: 1e-8 <= theta <= 10\n    return theta - {sin}(theta)\n"
SIN_TERMS = [(Fraction((-1) ** (k + 1), math.factorial(2 * k + 1)), 2 * k + 1) for k in range(1, 9)]


@pytest.mark.parametrize("imports, sin, where", [
    ("import numpy as np\n", "np.sin", "np.where"),
    ("import numpy\n", "numpy.sin", "numpy.where"),
    ("from numpy import sin, where\n", "sin", "where"),
])
def test_a_series_branch_in_numpy_code_is_written_with_where(imports, sin, where):
    fix = best_fix(f"{imports}\n\n{SINC_EXCESS.format(sin=sin)}")
    switch, series = _branch(fix.replacement, where, f"theta - {sin}(theta)")
    # x − sin x = x³/3! − x⁵/5! + … (NIST DLMF ch. 4, Maclaurin series of sin), eight terms below 0.9
    assert fix.rule == "series" and switch == 0.9 and fix.imports == []
    assert series == ("theta ** 3 / 6 - theta ** 5 / 120 + theta ** 7 / 5040 - theta ** 9 / 362880 + "
                      "theta ** 11 / 39916800 - theta ** 13 / 6227020800 + theta ** 15 / 1307674368000 - "
                      "theta ** 17 / 355687428096000")
    stable = lambda t: _series(SIN_TERMS, t) if abs(t) < switch else t - math.sin(t)  # noqa: E731
    pts = [(float(t),) for t in np.geomspace(1e-8, 10, 80)] + [(0.8999,), (0.9,), (0.9001,)]
    exact = lambda t: t - mpmath.sin(t)  # noqa: E731
    assert worst_loss(lambda t: t - math.sin(t), exact, pts) >= 15
    assert worst_loss(stable, exact, pts) <= 1.0


def test_must_not_fire_where_a_branch_not_taken_would_overflow():
    # np.where computes both branches: θ¹⁷ overflows for θ near 1e300 (OverflowError on a Python float, a
    # warning on an array) although that branch is not taken there. `x if c else y` computes one branch only.
    src = "import numpy as np\n\n\n" + SINC_EXCESS.format(sin="np.sin").replace("10\n", "1e300\n")
    finding, fixes, _ = fixes_of(src)
    assert finding.expression == "theta - np.sin(theta)" and fixes == []
    fix = best_fix("import math\n\n\n" + SINC_EXCESS.format(sin="math.sin").replace("10\n", "1e300\n"))
    assert fix.rule == "series" and fix.replacement.endswith(" else theta - math.sin(theta)")


# ---- a switch that leaves no loss behind ---------------------------------------------------------------------
J2 = """
import numpy as np


def spherical_j2(x):  # condhint: 1e-3 <= x <= 100
    return (3 / x**3 - 1 / x) * np.sin(x) - 3 / x**2 * np.cos(x)


@np.vectorize
def plotted(x):
    return x
"""
# j₂(x) = x² Σ (−x²/2)ᵏ / (k! (2k + 5)!!)  (NIST DLMF 10.53.1)
J2_TERMS = [(Fraction((-1) ** k, 2 ** k * math.factorial(k) * math.prod(range(1, 2 * k + 6, 2))), 2 * k + 2)
            for k in range(11)]


def _j2(x):
    """j₂(x) = (3/x³ − 1/x) sin x − 3/x² cos x (NIST DLMF 10.49.3)."""
    return (3 / x**3 - 1 / x) * mpmath.sin(x) - 3 / x**2 * mpmath.cos(x)


def test_the_spherical_bessel_j2_gets_its_series_below_a_round_switch():
    # Also: the decorated definition after it is blanked with its decorator for the re-analysis (it did not parse).
    fix = best_fix(J2)
    orig = "(3 / x**3 - 1 / x) * np.sin(x) - 3 / x**2 * np.cos(x)"
    switch, series = _branch(fix.replacement, "np.where", orig)
    assert switch == 2.0 and series == _written(J2_TERMS, "x") == (
        "x ** 2 / 15 - x ** 4 / 210 + x ** 6 / 7560 - x ** 8 / 498960 + x ** 10 / 51891840 - "
        "x ** 12 / 7783776000 + x ** 14 / 1587890304000 - x ** 16 / 422378820864000 + "
        "x ** 18 / 141919283810304000 - x ** 20 / 58754583497465856000 + x ** 22 / 29377291748732928000000")
    plain = lambda x: (3 / x**3 - 1 / x) * math.sin(x) - 3 / x**2 * math.cos(x)  # noqa: E731
    stable = lambda x: _series(J2_TERMS, x) if abs(x) < switch else plain(x)  # noqa: E731
    pts = [(float(t),) for t in np.geomspace(1e-3, 5, 200)] + [(1.9999,), (2.0,), (2.0001,)]
    assert worst_loss(plain, _j2, pts) >= 13
    assert worst_loss(stable, _j2, pts) <= 1.0
    # eight terms (the search's former limit) reach u/4 only below 0.9, where the original still loses 2.2 digits
    assert worst_loss(plain, _j2, [(float(t),) for t in np.linspace(0.9, 0.95, 200)]) >= 2.0


def test_the_switch_is_where_the_original_no_longer_loses_two_digits():
    # 1 − (x/2)/tan(x/2) ≈ x²/12: six terms of its series reach u/4 only below 0.2, where the original still
    # loses 2.5 digits (the re-analysis refused that fix; the switch was judged on a coarse grid before it was
    # rounded down). Measured at the switch as written, ten terms win: they reach 0.9.
    src = ("import numpy as np\n\n\ndef rate_factor(nm):  # condhint: 1e-6 <= nm <= 3\n"
           "    return (1 - 0.5 * nm / np.tan(0.5 * nm)) / nm**2\n")
    fix = best_fix(src)
    switch, series = _branch(fix.replacement, "np.where", "(1 - 0.5 * nm / np.tan(0.5 * nm)) / nm**2")
    # (1 − (x/2) cot(x/2)) / x² = Σₙ (−1)ⁿ⁺¹ B₂ₙ x²ⁿ⁻² / (2n)!  (NIST DLMF 4.19.6, Bernoulli numbers)
    terms = [(Fraction(-(-1) ** n) * Fraction(str(sympy.bernoulli(2 * n))) / math.factorial(2 * n), 2 * n - 2)
             for n in range(1, 11)]
    assert switch == 0.9 and series == _written(terms, "nm")
    plain = lambda x: (1 - 0.5 * x / math.tan(0.5 * x)) / x**2  # noqa: E731
    stable = lambda x: _series(terms, x) if abs(x) < switch else plain(x)  # noqa: E731
    exact = lambda x: (1 - x / 2 / mpmath.tan(x / 2)) / x**2  # noqa: E731
    pts = [(float(t),) for t in np.geomspace(1e-6, 3, 200)] + [(0.8999,), (0.9,), (0.9001,)]
    assert worst_loss(plain, exact, pts) >= 12
    assert worst_loss(stable, exact, pts) <= 1.5
    # why a switch at 0.2 was not enough: just past it the original loses more than two digits
    assert worst_loss(plain, exact, [(float(t),) for t in np.linspace(0.2, 0.25, 200)]) >= 2.0


def test_a_power_whose_base_may_be_negative_keeps_the_code_there():
    # 1 − b**c with b = (1 − q)/(1 + q) near 1 is −expm1(c·log1p(b − 1)) only where b > 0: with a whole c the
    # code also computes negative bases (q > 1), and there the fix must compute what the code computes. The
    # guard inside log1p keeps numpy's `where`, which evaluates both sides, from taking log1p(−2).
    from tests.trust.mp_eval import f64_value, mp_value

    src = ("import numpy as np\n"
           "def quantile(q, c: int):  # condhint: -0.5 <= q <= 2, 1 <= c <= 4\n"
           "    return 1.0/c*(1-((1.0-q)/(1.0+q))**c)\n")
    fix = best_fix(src)
    assert fix.rule == "near-one-difference"
    # (on 0 < q < 1 alone, the declared range settles the guard: `-np.expm1(c * np.where(q / (1.0+q) < 0.25, …`)
    # log1p only near its zero (elsewhere 1 + d cancels inside it, near q = 1), log where the base is far from 1
    assert fix.replacement == ("-np.where(0 < (1.0-q)/(1.0+q), np.expm1(c * np.where(abs(q / (1.0+q)) < 0.25, "
                               "np.log1p(np.where(0 < (1.0-q)/(1.0+q), -(2 * q / (1.0+q)), 0)), "
                               "np.log(np.where(0 < (1.0-q)/(1.0+q), (1.0-q)/(1.0+q), 1)))), ((1.0-q)/(1.0+q))**c - 1)")
    written = "1-((1.0-q)/(1.0+q))**c"
    with np.errstate(all="raise"):  # no floating-point exception in the side not taken
        for q in (1.1, 1.5, 2.0):
            for c in (1.0, 2.0, 3.0):  # negative bases with whole exponents: exactly the code's value
                assert f64_value(fix.replacement, {"q": q, "c": c}) == f64_value(written, {"q": q, "c": c})
    with mpmath.workdps(60):  # small q: cancellation in the code, none in the fix (Goldberg 1991, log1p/expm1)
        for q, c in ((1e-12, 1.0), (3e-10, 2.0), (-2e-11, 3.0)):
            exact = mp_value(written, {"q": q, "c": c})
            assert abs(f64_value(fix.replacement, {"q": q, "c": c}) / exact - 1) < 1e-14
            assert abs(f64_value(written, {"q": q, "c": c}) / exact - 1) > 1e-9
        for q, c in ((0.999999, 1.0), (0.999999, 3.0), (-0.5, 2.0)):  # far from the cancellation: as good
            exact = mp_value(written, {"q": q, "c": c})
            assert abs(f64_value(fix.replacement, {"q": q, "c": c}) / exact - 1) < 1e-15
