"""Loops read as recurrences and measured over their trip counts (issue 15), each against an outside reference."""
from __future__ import annotations

import math
import textwrap
import zlib
from fractions import Fraction

import mpmath
import numpy as np
import pytest

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.fixing import attach_fixes
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.loops import CAP, analyse_loop, checkpoints_for, element_samples, iterate
from condhint.reading.module_index import read_module
from condhint.reading.statements import Walker
from condhint.rewrites import apply_fixes
from tests.conftest import codes, findings

U = 2.0**-53  # IEEE 754-2019 binary64 unit roundoff


def recurrences(src: str):
    index, _ = read_module(textwrap.dedent(src))
    walker = Walker(index)
    for unit in index.units:
        walker.walk(unit)
    return walker.recurrences


def digits(err: float) -> float:
    return min(math.log10(max(err, U) / U), 53 * math.log10(2))  # binary64 holds 53·log10(2) ≈ 15.95 digits


# ---- recursive summation -----------------------------------------------------------------------------
SUM = """
def total(xs):  # condhint: len(xs) in [10, 800], -1 <= xs <= 1
    s = 0.0
    for x in xs:
        s += x
    return s
"""


def test_recursive_summation_within_highams_bound_against_fsum():
    # Higham 2002, chapter on summation: |fl(Σx) − Σx| ≤ (n−1)u Σ|xᵢ| (to first order); the exact sum of
    # the same binary64 terms is math.fsum's (Shewchuk's algorithm, correctly rounded).
    (rec,) = recurrences(SUM)
    assert rec.trips == 800 and rec.elements == ("x",)
    n_samples = 12
    elems = element_samples(rec, rec.trips, n_samples, seed=7, default=(1e-6, 1e6))["x"]
    run = iterate(rec, {}, {"x": elems}, rec.trips, F64_BACKEND, n_samples, [rec.trips])
    s64 = np.asarray(run[-1][1]["s"], dtype=float)
    for j in range(n_samples):
        terms = [float(v) for v in elems[:, j]]
        exact = Fraction(0)
        for t in terms:
            exact += Fraction(t)
        assert math.fsum(terms) == float(exact)  # fsum is correctly rounded here (the reference checked)
        bound = (len(terms) - 1) * U * math.fsum(abs(t) for t in terms)
        assert abs(Fraction(float(s64[j])) - exact) <= Fraction(bound)
        assert s64[j] == sum(terms)  # the evaluator sums in the code's order, like Python's own loop


def test_measured_digits_of_a_sum_agree_with_fsum():
    # The worst digits lost that condhint reports for the loop, recomputed here with math.fsum as the exact sum.
    (rec,) = recurrences(SUM)
    a = analyse_loop(rec, Config())
    assert a is not None and a.name == "s" and not a.extrapolated
    elems = element_samples(rec, rec.trips, 8, seed=_seed(rec), default=Config().default_range)["x"]
    worst = 0.0
    for j in range(elems.shape[1]):
        terms = [float(v) for v in elems[:, j]]
        exact = math.fsum(terms)
        worst = max(worst, digits(abs(sum(terms) - exact) / abs(exact)))
    assert a.measured_digits == pytest.approx(worst, abs=0.05)


def _seed(rec) -> int:
    return zlib.crc32(rec.key().encode())  # the loop's own seed, as numeric/loops.py draws its samples


# ---- an unstable recurrence ----------------------------------------------------------------------------
FORSYTHE = """
import math
def moments():
    I = 1 - math.exp(-1)
    for n in range(1, 16):
        I = 1 - n * I
    return I
"""


def test_forwards_recurrence_for_the_moments_is_unstable():
    # Forsythe, Malcolm & Moler 1977: I(n) = 1 − n I(n−1), I(0) = 1 − 1/e, for ∫₀¹ xⁿ e^(x−1) dx is unstable
    # forwards (the error of I(0) is multiplied by n!) and stable backwards.
    (f,) = findings(FORSYTHE)
    assert (f.code, f.name, f.span.line) == ("CH102", "unstable-recurrence", 6)
    assert "backwards" in f.message and "unstable recurrence" in f.message
    # reference: the integral by mpmath quadrature at 50 digits; binary64 computed here in the same order
    with mpmath.workdps(50):
        exact = mpmath.quad(lambda x: x**15 * mpmath.exp(x - 1), [0, 1])
        i = 1 - math.exp(-1)
        for n in range(1, 16):
            i = 1 - n * i
        lost = digits(float(abs((mpmath.mpf(i) - exact) / exact)))
    assert lost > 8  # far beyond the few digits a stable computation loses (15! ≈ 1.3e12)
    assert f.measured_digits_lost == pytest.approx(lost, abs=0.1)


def test_every_digit_is_lost_by_the_step_where_n_factorial_exceeds_one_over_u():
    # The error u·|I(0)| grows like n! (Forsythe, Malcolm & Moler 1977): n! ≈ 1/u between n = 18 (6.4e15)
    # and n = 19 (1.2e17), so less than one correct digit is left by about n = 17-19.
    src = FORSYTHE.replace("range(1, 16)", "range(1, 40)")
    (rec,) = recurrences(src)
    a = analyse_loop(rec, Config())
    assert a is not None and a.kind == "unstable" and a.all_lost_at is not None
    assert 16 <= a.all_lost_at <= 20 and a.digits == pytest.approx(15.95, abs=0.01)


# ---- a series that cancels -----------------------------------------------------------------------------
SERIES = """
def exp_minus(x):  # condhint: x in [X, X]
    term = 1.0
    s = 1.0
    for k in range(1, 120):
        term *= -x / k
        s += term
    return s
"""


@pytest.mark.parametrize("x", [10, 20])
def test_taylor_series_of_exp_minus_x_for_large_x_is_reported(x):
    # reference: mpmath.exp(-x) at 50 digits (the series' tail beyond 120 terms is below 20^120/120! ≈ 1e-43,
    # negligible against e^-20 ≈ 2e-9); binary64 summed here in the code's order.
    (f,) = findings(SERIES.replace("X", str(x)))
    assert f.code == "CH101" and "series" in f.message and "cancels" in f.message
    term = s = 1.0
    for k in range(1, 120):
        term *= -float(x) / k
        s += term
    with mpmath.workdps(50):
        lost = digits(float(abs((mpmath.mpf(s) - mpmath.exp(-x)) / mpmath.exp(-x))))
    assert lost > 5
    assert f.measured_digits_lost == pytest.approx(lost, abs=0.1)


# ---- a clock --------------------------------------------------------------------------------------------
CLOCK = """
def run(dt):  # condhint: dt in [0.01, 0.01]
    t = 0.0
    for i in range(TRIPS):
        t += dt
    return t
"""


def _drift(n: int, dt: float) -> float:
    t = 0.0
    for _ in range(n):
        t += dt
    exact = n * Fraction(dt)  # n·dt computed exactly
    return digits(float(abs(Fraction(t) - exact) / exact))


def test_clock_drift_within_the_cap_matches_exact_n_dt():
    (f,) = findings(CLOCK.replace("TRIPS", "1000"))
    assert f.code == "CH101" and "accumulates" in f.message
    assert f.measured_digits_lost == pytest.approx(_drift(1000, 0.01), abs=0.05)


def test_clock_drift_of_a_long_loop_is_extrapolated_and_said_so():
    # 10^5 steps: measured at the cap and extrapolated; within a digit of the true drift against n·dt exact.
    (f,) = findings(CLOCK.replace("TRIPS", "100000"))
    truth = _drift(100_000, 0.01)
    assert truth > 2
    assert f"first {CAP} steps" in f.message and "extrapolated" in f.message
    assert f.digits_lost == pytest.approx(truth, abs=1.0)


def test_counting_fix_for_a_clock_is_verified_and_keeps_the_values():
    src = textwrap.dedent(CLOCK.replace("TRIPS", "100000"))
    ma = analyse_module(src, "t.py", Config())
    attach_fixes(ma, Config())
    (f,) = ma.findings
    assert [x.rule for x in f.fixes] == ["loop-counting", "loop-kahan"]  # the loop may also stay, compensated
    fix = f.fixes[0]
    assert fix.replacement == "t = (i + 1) * dt" and fix.span == f.span
    assert fix.measured_digits_lost_after <= f.digits_lost - 1
    # the counted clock equals the accumulated one up to rounding at every step (checked with exact Fractions)
    t, dt = 0.0, 0.01
    for i in range(2000):
        t += dt
        assert abs(Fraction((i + 1) * dt) - Fraction(t)) <= (i + 1) * 2 * U * Fraction(t)


@pytest.mark.parametrize("src", [
    CLOCK.replace("TRIPS", "100000").replace("t = 0.0", "t = t0").replace("(dt)", "(dt, t0)"),  # t0 not literal
    CLOCK.replace("TRIPS", "100000").replace("t += dt", "t += dt\n        dt *= 1.0001"),  # the step changes
])
def test_no_counting_fix_where_the_counted_form_is_not_the_same(src):
    ma = analyse_module(textwrap.dedent(src), "t.py", Config())
    attach_fixes(ma, Config())
    assert [f.code for f in ma.findings] == ["CH101"]  # the drift is still reported, without counting
    assert all(x.rule != "loop-counting" for f in ma.findings for x in f.fixes)


# ---- must not fire ----------------------------------------------------------------------------------------
QUIET = {
    "integer loop": "def f(n: int):\n    s = 0\n    for k in range(100):\n        s += k * k\n    return s\n",
    "positive terms, modest length": "def f():\n    s = 0.0\n    for k in range(1, 200):\n        s += 1.0 / k**2\n"
                                     "    return s\n",
    "array without cancellation": "def f(xs):  # condhint: len(xs) in [1, 1000], 0 < xs < 1\n    s = 0.0\n"
                                  "    for x in xs:\n        s += x\n    return s\n",
    "array by index": "def f(a):  # condhint: len(a) in [1, 1000], 1 <= a <= 2\n    s = 0.0\n"
                      "    for i in range(len(a)):\n        s = s + a[i] * a[i]\n    return s\n",
    "Newton's iteration": "def f(a):  # condhint: 1 <= a <= 100\n    x = a\n    for _ in range(30):\n"
                          "        x = 0.5 * (x + a / x)\n    return x\n",
    "unknown trip count": "def f(n, dt):\n    t = 0.0\n    for i in range(n):\n        t += dt\n    return t\n",
    "branch in the body": "def f(dt):\n    t = 0.0\n    for i in range(10**6):\n        if t > 1:\n"
                          "            break\n        t += dt\n    return t\n",
}


@pytest.mark.parametrize("name", sorted(QUIET))
def test_loops_that_must_not_fire(name):
    assert codes(QUIET[name]) == []


def test_quiet_loops_are_still_read_and_measured():
    # The must-not-fire cases above are silent because they were measured accurate, not because they were skipped.
    for name in ("positive terms, modest length", "array without cancellation", "array by index",
                 "Newton's iteration"):
        (rec,) = recurrences(QUIET[name])
        a = analyse_loop(rec, Config())
        assert a is not None and a.digits < 2, name


def test_checkpoints_cover_every_early_step_and_end_at_the_last():
    assert checkpoints_for(5) == [1, 2, 3, 4, 5]
    marks = checkpoints_for(1000)
    assert marks[:64] == list(range(1, 65)) and marks[-1] == 1000 and 512 in marks


FSUM = SUM.replace("len(xs) in [10, 800]", "len(xs) in [10, 1e5]")  # long enough to lose ≥ 2 digits


def test_fsum_fix_replaces_a_running_sum_and_is_verified():
    src = textwrap.dedent(FSUM)
    ma = analyse_module(src, "t.py", Config())
    attach_fixes(ma, Config())
    (f,) = ma.findings
    assert f.code == "CH101" and f.span.line == 5
    fsum = [x for x in f.fixes if x.rule == "loop-fsum"]
    (fix,) = fsum
    assert fix.replacement == "s = math.fsum(xs)" and fix.imports == ["import math"]
    assert (fix.span.line, fix.span.end_line) == (4, 5)  # the whole loop
    # math.fsum is correctly rounded (Shewchuk; Python docs): on the loop's own samples it loses nothing,
    # checked here against exact rational sums.
    (rec,) = recurrences(FSUM)
    elems = element_samples(rec, min(rec.trips, CAP), 8, _seed(rec), Config().default_range)["x"]
    for j in range(elems.shape[1]):
        terms = [float(v) for v in elems[:, j]]
        exact = sum((Fraction(t) for t in terms), Fraction(0))
        assert math.fsum(terms) == float(exact)
    assert fix.measured_digits_lost_after == 0.0 and f.digits_lost >= 2
    fixed = apply_fixes(src, [fix])
    assert "import math" in fixed and "    s = math.fsum(xs)\n    return s" in fixed and "for x" not in fixed


def test_no_fsum_fix_when_the_loop_variable_is_used_after_the_loop():
    src = textwrap.dedent(FSUM.replace("    return s\n", "    return s, x\n"))
    ma = analyse_module(src, "t.py", Config())
    attach_fixes(ma, Config())
    (f,) = ma.findings
    assert f.code == "CH101" and [x.rule for x in f.fixes if x.rule == "loop-fsum"] == []


LOGISTIC = """
def logistic(r, x):  # condhint: r in [R, R], 0.1 <= x <= 0.3
    for _ in range(100):
        x = r * x * (1.0 - x)
    return x
"""


def test_the_chaotic_logistic_map_is_unstable_and_the_contracting_one_is_not():
    # x ← 4x(1 − x) is conjugate to the tent map: its Lyapunov exponent is ln 2, errors double per step on
    # average (a standard result of dynamical systems, from memory); at r = 2.5 it contracts to x = 0.6.
    (rec,) = recurrences(LOGISTIC.replace("R", "4.0"))
    a = analyse_loop(rec, Config())
    assert a is not None and a.kind == "unstable" and 1.5 <= a.factor <= 3.0
    assert a.all_lost_at is not None and a.all_lost_at <= 64  # 2^k u ≥ 0.1 by k ≈ 50
    (f,) = findings(LOGISTIC.replace("R", "4.0"))
    assert f.code == "CH102" and "chaotic map" in f.message
    assert codes(LOGISTIC.replace("R", "2.5")) == []


RUNNING = """
def running(xs):  # condhint: len(xs) in [10, 1e5], -1 <= xs <= 1
    s = 0.0
    out = []
    for x in xs:
        s += x
        out.append(s)
    return out
"""


def test_kahan_fix_where_the_loop_must_stay():
    src = textwrap.dedent(RUNNING)
    ma = analyse_module(src, "t.py", Config())
    attach_fixes(ma, Config())
    (f,) = ma.findings
    (fix,) = f.fixes  # no fsum (the loop also fills `out`), no counting (the step is not fixed)
    assert fix.rule == "loop-kahan" and (fix.span.line, fix.span.end_line) == (5, 7)
    fixed = apply_fixes(src, [fix])
    assert fixed == src.replace("    for x in xs:\n        s += x\n", "    s_comp = 0.0\n    for x in xs:\n"
                                "        s_y = x - s_comp\n        s_t = s + s_y\n        s_comp = (s_t - s) - s_y\n"
                                "        s = s_t\n")
    # Compensated summation (Kahan 1965; Higham 2002, chapter on summation), run here in Python on the loop's
    # own samples against exact rational sums: it loses no more than the fix's measured figure says.
    (rec,) = recurrences(RUNNING)
    elems = element_samples(rec, CAP, 8, _seed(rec), Config().default_range)["x"]
    worst = 0.0
    for j in range(elems.shape[1]):
        s = comp = 0.0
        for v in elems[:, j]:
            y = float(v) - comp
            t = s + y
            comp = (t - s) - y
            s = t
        exact = sum((Fraction(float(v)) for v in elems[:, j]), Fraction(0))
        worst = max(worst, digits(float(abs(Fraction(s) - exact) / abs(exact))))
    assert worst <= fix.measured_digits_lost_after + 0.05 and fix.measured_digits_lost_after <= f.digits_lost - 1
    # a statement sharing its line with a comment is left alone (the rewrite would drop the comment)
    commented = textwrap.dedent(RUNNING.replace("s += x\n", "s += x  # total\n"))
    ma = analyse_module(commented, "t.py", Config())
    attach_fixes(ma, Config())
    assert [x.rule for x in ma.findings[0].fixes] == []
