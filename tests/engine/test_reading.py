"""Reading Python source into sites: names, imports, constants, inlining, ranges from comments and guards."""
from __future__ import annotations

import math
import time
from pathlib import Path

import pytest

from condhint.cli import main
from tests.conftest import codes, findings

SQRT_DIFF = "{imp}\ndef f(x):  # condhint: 1e6 <= x <= 1e15\n    return {s}(x + 1) - {s}(x)\n"


@pytest.mark.parametrize("imp,spelling", [
    ("import math", "math.sqrt"), ("import numpy as np", "np.sqrt"), ("import numpy", "numpy.sqrt"),
    ("from math import sqrt", "sqrt"), ("from numpy import sqrt as root", "root"), ("from numpy import *", "sqrt"),
    ("import math as m", "m.sqrt"),
])
def test_functions_are_recognised_under_any_alias(imp, spelling):
    assert codes(SQRT_DIFF.format(imp=imp, s=spelling)) == ["CH101"]


def test_unknown_or_shadowed_functions_are_opaque_inputs():
    assert codes("def sqrt(v):\n    return v\n" + SQRT_DIFF.format(imp="", s="sqrt")) == []
    assert codes(SQRT_DIFF.format(imp="import mylib", s="mylib.sqrt")) == []


def test_inlining_a_multi_statement_formula_reports_the_losing_line_with_the_chain():
    (f,) = findings("""
        import math
        def root(a, b, c):  # condhint: 1 <= a <= 2, 1e5 <= b <= 1e8, 1 <= c <= 2
            disc = b*b - 4*a*c
            s = math.sqrt(disc)
            return (-b + s) / (2*a)
        """)
    assert f.code == "CH101" and f.span.line == 6 and f.expression == "-b + s"
    assert [line for line, _ in f.related] == [4, 5]


def test_module_constants_are_constants_not_inputs():
    src = """
        import math
        G = 9.80665
        HALF = 1 / 2
        def f(x):  # condhint: 1e-12 <= x <= 1e-6
            return math.log(G * x + HALF * 2) * G
        """
    (f,) = findings(src)
    assert set(f.inputs) == {"x"}


def test_reassigned_module_names_are_inputs(analyse_src):
    mod = analyse_src("import math\nK = 1.0\nK = 2.0\nC = 3.0\ndef f(x):\n    return math.log(K + x + C)\n")
    (site,) = mod.sites
    assert {n.name for n in __import__("condhint.expr").expr.topological(site.root) if n.kind == "input"} == {"K", "x"}


@pytest.mark.parametrize("bind", ["y = (M := x * 2.0)", "M = x * 2.0"])
def test_a_name_bound_in_one_branch_is_no_longer_the_module_constant(analyse_src, bind):
    # After `if`, a name bound in one branch only (by `=` or by `:=` inside an expression) is either the
    # branch's value or the module's: an unknown input, not the constant 3.0 (Python's scoping rules).
    mod = analyse_src(f"import math\nM = 3.0\ndef f(x):\n    if x > 1.0:\n        {bind}\n"
                      "    return math.log(M + 1.5)\n")
    site = next(s for s in mod.sites if "log" in s.root.text)
    names = {n.name for n in __import__("condhint.expr").expr.topological(site.root) if n.kind == "input"}
    assert names == {"M"}


@pytest.mark.parametrize("src", [
    "from sympy import symbols\nx, y = symbols('x y')\ndef f():\n    return x**y - 1\n",  # module-level symbols
    "from sympy import S\ndef f():\n    r = S(2) ** 70 / S(3) ** 14\n    return r - 1.5\n",  # exact sympy numbers
    "from sympy import QQ, ring\nR, x = ring('x', QQ)\ndef f():\n    p = x**2 + 1\n    return p - 1\n",  # rings
])
def test_sympy_objects_are_not_binary64(analyse_src, src):
    assert analyse_src(src).sites == []


def test_number_constructors_of_literals_are_constants(analyse_src):
    # np.float64(3) and np.float64("-2.5") are the binary64 numbers they spell.
    mod = analyse_src("import numpy as np\ndef f(x):\n    return x ** (1 / np.float64(5)) + np.float64('-2.5') * x\n")
    (site,) = mod.sites
    nodes = __import__("condhint.expr").expr.topological(site.root)
    assert {n.name for n in nodes if n.kind == "input"} == {"x"}
    assert sorted(n.value for n in nodes if n.kind == "const") == [-2.5, 1.0, 5.0]


@pytest.mark.parametrize("src", [
    "from mpmath import mp\ndef f(x):\n    return (1 + x) ** (1 / mp.mpf(5)) - 1.0\n",
    "import mpmath\nz = mpmath.mpf(2)\ndef f(n):\n    return (-z) ** n / 4.0 ** n\n",
])
def test_mpmath_numbers_are_not_binary64(analyse_src, src):
    # mpmath numbers have their own precision and an unbounded exponent (mpmath documentation): the binary64
    # model (unit roundoff, overflow at 2**1024) does not apply to them; plain parts (`1 + x`) still are sites.
    texts = [site.root.text for site in analyse_src(src).sites]
    assert texts and not any("mpf" in t or "z" in t for t in texts), texts


def test_a_shape_alias_gives_integers(analyse_src):
    # `s = a.shape; s[-1]` is an integer as much as `a.shape[-1]` is (numpy: shapes are tuples of ints).
    mod = analyse_src("def f(a, y):\n    s = a.shape\n    return (s[-1] + y) * 0.5\n")
    (site,) = mod.sites
    nodes = __import__("condhint.expr").expr.topological(site.root)
    assert {(n.text, n.is_int) for n in nodes if n.kind == "input"} == {("s[-1]", True), ("y", False)}


@pytest.mark.parametrize("loop, bounds", [("range(1, 10)", (1.0, 9.0)), ("range(10, 0, -2)", (2.0, 10.0)),
                                          ("range(5)", (0.0, 4.0)), ("range(m)", (0.0, 99.0)),
                                          ("range(n)", (0.0, math.inf))])
def test_a_range_loop_bounds_its_counter(analyse_src, loop, bounds):
    # Python's range: start, start + step, … before stop (the language reference); constant bounds give an
    # interval (`m = 100` before the loop counts), others a lower bound and a filter k <= n - 1.
    mod = analyse_src(f"import math\ndef f(x, n):\n    s = 0.0\n    m = 100\n    for k in {loop}:\n"
                      "        s += x ** k / math.factorial(k)\n    return s\n")
    (site,) = mod.sites
    r = site.ranges["k"]
    assert r.is_int
    assert (r.interval.low, r.interval.high, r.source) == (*bounds, "range")


def test_an_inner_range_is_bounded_by_the_outer_counter(analyse_src):
    # `for k in range(i + 1)` inside `for i in range(n)`: k <= i holds where the body runs (k > i is never sampled).
    mod = analyse_src("def f(x, n):\n    s = 0.0\n    for i in range(n):\n        for k in range(0, i + 1):\n"
                      "            s += x ** (i - k)\n    return s\n")
    texts = {f.condition.text for site in mod.sites for f in site.filters}
    assert "k < i + 1" in texts, texts


def test_comprehension_counters_over_range_are_integers(analyse_src):
    # The Hilbert-like `1. / (i + j - 1)`: i + j - 1 is integer arithmetic (exact); only the division rounds.
    mod = analyse_src("def f(n):\n    A = []\n    for i in range(1, 13):\n"
                      "        A.append([1. / (i + j - 1) for j in range(1, n + 1)])\n    return A\n")
    (site,) = [s for s in mod.sites if s.root.text == "1. / (i + j - 1)"]
    assert site.ranges["j"].is_int and site.ranges["i"].interval.high == 12.0
    assert site.root.args[1].is_int  # the denominator


def test_integer_only_arithmetic_is_never_reported():
    assert findings("def f(n: int, m: int):\n    return (n * n - m * m) + (n - m) ** 2\n") == []
    assert findings("def f(xs):\n    n = len(xs)\n    for i in range(n):\n        j = i - n + 1\n"
                    "        xs[j] = i * 2 - 1\n") == []


RANGE_FORMS = [
    ("# condhint: 1e-12 <= x <= 1e-6", ""),
    ("# condhint: x in [1e-12, 1e-6]", ""),
    ("", "    assert 1e-12 <= x <= 1e-6\n"),
    ("", "    if x > 1e-6 or x < 1e-12:\n        raise ValueError('x out of range')\n"),
    ("", "    if not (x <= 1e-6):\n        return 0.0\n    assert x >= 1e-12\n"),
]


@pytest.mark.parametrize("comment,guard", RANGE_FORMS)
def test_ranges_from_comments_asserts_and_guards(comment, guard):
    (f,) = findings(f"import math\ndef f(x):  {comment}\n{guard}    return math.exp(x) - 1\n")
    assert f.inputs["x"].high == pytest.approx(1e-6) and f.inputs["x"].low == pytest.approx(1e-12)
    assert f.inputs["x"].source != "default"


def test_branches_narrow_the_range_of_the_code_inside_them():
    src = """
        import math
        def f(x):  # condhint: 1e-12 <= x <= 30
            if x < 1e-3:
                y = x + x * x / 2
            else:
                y = math.exp(x) - 1
            return y
        """
    assert codes(src) == [] or all(f.span.line != 7 or f.severity == "info" for f in findings(src))
    (f,) = [f for f in findings(src.replace("if x < 1e-3", "if x > 1e-3")) if f.span.line == 7]
    assert f.inputs["x"].high == pytest.approx(1e-3)


def test_suppression_comment_silences_only_its_line_and_codes():
    base = "import math\ndef f(x):  # condhint: 1e-12 <= x <= 1e-6\n    return math.exp(x) - 1{c}\n"
    assert codes(base.format(c="  # condhint: ignore")) == []
    assert codes(base.format(c="  # condhint: ignore[CH101]")) == []
    assert codes(base.format(c="  # condhint: ignore[CH201]")) == ["CH101"]


def test_a_comment_it_cannot_read_is_reported_not_ignored():
    fs = findings("import math\ndef f(x):  # condhint: x is small\n    return math.exp(x) - 1\n")
    assert [f.code for f in fs][:1] == ["CH001"] and "not understood" in fs[0].message


def test_thirty_levels_of_reassignment_stay_linear():
    def module(levels: int) -> str:
        names = [f"v{i}" for i in range(levels)]
        body = ["    v0 = x + y"] + [f"    {b} = {a} * {a} + {a}" for a, b in zip(names, names[1:])]
        return "def f(x, y):  # condhint: 0.5 <= x <= 1, 0.5 <= y <= 1\n" + "\n".join(body) + f"\n    return {names[-1]}\n"

    times = {}
    for levels in (10, 30):
        t0 = time.perf_counter()
        findings(module(levels))
        times[levels] = time.perf_counter() - t0
    assert times[30] < 8 * times[10] + 0.5, times  # linear: ~3×, never exponential


def test_syntax_error_yields_one_finding_and_the_run_goes_on(tmp_path: Path, capsys):
    (tmp_path / "bad.py").write_text("def f(x):\n    return (x +\n")
    (tmp_path / "good.py").write_text(SQRT_DIFF.format(imp="import math", s="math.sqrt"))
    assert main(["check", str(tmp_path), "--min-severity", "info"]) == 1
    out = capsys.readouterr().out
    assert "bad.py:2" in out and "[CH001]" in out and "good.py:3:12: error" in out


def test_the_engine_never_evaluates_user_code(tmp_path: Path):
    marker = tmp_path / "evaluated"
    src = f"""
import math, os
open({str(marker)!r}, "w").write("module ran")
G = os.system("touch {marker}") or 9.81
def f(x):  # condhint: 1e6 <= x <= 1e15
    return math.sqrt(x + 1 + open({str(marker)!r}, "w").write("x")) - math.sqrt(x) + (1 / 0)
raise SystemExit("module body executed")
"""
    (tmp_path / "evil.py").write_text(src)
    assert main(["check", str(tmp_path / "evil.py"), "--format", "json"]) in (0, 1)
    assert not marker.exists()


def test_counters_and_shapes_are_integers_not_reported(analyse_src):
    # Integer bookkeeping on real code was a main source of noise (docs/robustness.md).
    src = """
        def f(xs, a):
            k = 0
            for v in xs:
                k += 1
            n, m = a.shape
            return (k * k - n * m) - (n - m) ** 2
        """
    assert analyse_src(src).sites == []  # integer-only: not even analysed


def test_sympy_symbols_are_not_floating_point_numbers(analyse_src):
    src = """
        import sympy as sp
        from sympy.abc import t
        x = sp.Symbol("x")
        a = (x + 1) ** 0.5 - x ** 0.5
        b = 1 - t * t / (t * t + 1e-12)
        """
    assert analyse_src(src).sites == []
    assert codes("y = 1e15\na = (y + 1) ** 0.5 - y ** 0.5\n") == ["CH101"]


@pytest.mark.parametrize("imports, np", [("import numpy as np", "np."), ("import numpy", "numpy."),
                                         ("from numpy import exp, where", "")])
def test_np_where_is_piecewise_and_only_the_chosen_branch_counts(imports, np):
    # Outside the guarded regime exp(x) - 1 still loses about log10(1/x) digits (Goldberg 1991): the worst
    # point is just above the switch, x ≈ 1e-5, never inside the series branch. The same in every spelling.
    (f,) = findings(f"{imports}\ndef f(x):  # condhint: 1e-12 <= x <= 1\n"
                    f"    return {np}where(x < 1e-5, x + x*x/2, {np}exp(x) - 1)\n")
    assert f.expression == f"{np}exp(x) - 1" and f.worst_at["x"] >= 1e-5
    assert 4.0 <= f.measured_digits_lost <= 5.5


def test_a_plain_alias_is_the_same_input():
    (f,) = findings("import math\ndef f(ka, c):  # condhint: 1e-3 <= ka <= 1e-2, 1e-9 <= c <= 1e-8\n"
                    "    b = ka\n    return (-b + math.sqrt(b*b + 4*ka*c)) / 2\n")
    assert set(f.inputs) == {"ka", "c"}
