"""Trust on code nobody annotated: integers, objects that are not floats, ranges the code states, quiet when
unsure. Each behaviour has a case that must fire and one that must not (check values named per test)."""
from __future__ import annotations

import textwrap

import pytest

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.expr import topological

CFG = Config(kappa_formula=False)


def analysed(src: str, cfg: Config = CFG):
    return analyse_module(textwrap.dedent(src), "t.py", cfg, cache=None)


def codes(src: str, min_severity: str = "info") -> list[str]:
    return [f.code for f in analysed(src).report.findings
            if {"info": 1, "warning": 2, "error": 3}[f.severity] >= {"info": 1, "warning": 2, "error": 3}[min_severity]]


def inputs_of(src: str) -> dict[str, tuple[float, float, str, bool]]:
    (site,) = analysed(src).sites
    return {k: (r.interval.low, r.interval.high, r.source, r.is_int) for k, r in site.ranges.items()}


# ---- integers ----------------------------------------------------------------------------------------------------
# `(n + m * 1.0) - n` loses m's digits when m is small against n (n = 1e6, m = 1e-6: 12 digits), and is exact
# for integers below 2**53 (common practice): it fires only when the inputs may be floats. (Without the float
# literal it would look like integer bookkeeping and be left alone: see test_integer_bookkeeping_below.)
CANCELS = "(n + m * 1.0) - n"


@pytest.mark.parametrize("header, body", [
    ("def f(n: int, m: int):", ""),
    ("def f(n=10, m=3):", ""),                                # int literal defaults
    ("def f(n, m, a):", "    x = a[n] + a[m]\n"),              # used as indices
    ("def f(n, m, a):", "    x = a[m: n - 1]\n"),              # slice bounds
    ("def f(n, m):", "    pad = (n - 1) * ' ' + [0] * m\n"),   # repetition counts of a str and a list
    ("def f(n, m):", "    grid = np.zeros(n) + np.ones(m)\n"), # array lengths
    ("def f(n: np.int64, m: np.intp):", ""),                  # numpy integer annotations
])
def test_what_the_code_uses_as_an_integer_is_exact(header: str, body: str) -> None:
    src = f"import numpy as np\n{header}\n{body}    return {CANCELS}\n"
    assert codes(src) == []
    floaty = f"import numpy as np\ndef f(n, m):\n    return {CANCELS}\n"
    assert codes(floaty) == ["CH101"]  # the same expression with nothing saying n and m are integers


@pytest.mark.parametrize("value", ["np.argmax(a)", "a.nonzero()[0].max() + 1", "np.arange(10)[3]", "round(a)",
                                   "math.comb(a, 3)", "len(a) // 2"])
def test_calls_that_return_integers_are_exact(value: str) -> None:
    src = f"import math\nimport numpy as np\ndef f(a, b):\n    n = {value}\n    m = np.argmin(b)\n" \
          "    return (n + m * 1.0) - n\n"
    assert codes(src) == []


def test_round_with_digits_is_a_float() -> None:
    # round(x, 2) returns a float (Python's documentation): its cancellation is real
    assert codes("def f(a, b):\n    n = round(a, 2)\n    m = round(b, 3)\n    return (n + m * 1.0) - n\n") == ["CH101"]


def test_loop_over_a_literal_tuple_of_ints() -> None:
    src = "def f(m: int):\n    s = 0.0\n    for n in (1, 2, 4):\n        s = (n + m * 1.0) - n\n    return s\n"
    assert codes(src) == []
    assert codes("def f(ns, m):\n    for n in ns:\n        s = (n + m * 1.0) - n\n    return s\n") == ["CH101"]


def test_values_only_formatted_into_strings_are_not_analysed() -> None:
    assert codes("def f(n, m):\n    return f'{(n + m * 1.0) - n} parameters'\n") == []
    assert codes("def f(n, m):\n    return str((n + m * 1.0) - n)\n") == ["CH101"]


# ---- objects that are not binary64 numbers --------------------------------------------------------------------------
def test_objects_of_unknown_classes_are_not_analysed() -> None:
    # a time or a quantity of another library: its arithmetic is not binary64's (design §2)
    assert codes("from astro import Time\ndef f(a, m):\n    n = Time(a)\n    return (n + m * 1.0) - n\n") == []
    assert codes("def f(a, m):\n    n = make_time(a)\n    return (n + m * 1.0) - n\n") == ["CH101"]


# ---- ranges from the code ------------------------------------------------------------------------------------------
def test_a_float_default_gives_a_scale_and_a_declaration_wins() -> None:
    (lo, hi, source, _), = inputs_of("import math\ndef f(alpha=0.7):\n    return math.exp(alpha) - 1\n").values()
    assert (lo, hi) == pytest.approx((0.007, 70.0)) and source == "parameter default"  # two decades either side
    declared = inputs_of("import math\ndef f(alpha=0.7):  # condhint: 1e-9 <= alpha <= 1e-6\n"
                         "    return math.exp(alpha) - 1\n")
    assert declared["alpha"][:3] == (1e-9, 1e-6, "comment")
    guarded = inputs_of("import math\ndef f(alpha=0.7):\n    assert alpha < 1e-5\n    return math.exp(alpha) - 1\n")
    assert guarded["alpha"][1] == 1e-5 and guarded["alpha"][2] == "assert"  # the code's own bound, not the scale


def test_numpydoc_parameter_lines_state_ranges() -> None:
    src = '''
        import math
        def f(alpha, beta):
            """Smoothing.

            Parameters
            ----------
            alpha : float
                Smoothing factor, 0 < alpha <= 1.
            beta : float
                Must be positive.
            """
            return math.exp(alpha) - beta
        '''
    got = inputs_of(src)
    assert got["alpha"][:3] == (0.0, 1.0, "docstring") and got["beta"][:3] == (0.0, float("inf"), "docstring")


def test_clip_bounds_what_follows() -> None:
    # np.clip(x, 1e-9, 1e-6) keeps log(1 + x) in the regime where it loses digits (Goldberg 1991); a clip to
    # [1, 10] keeps it where it loses none
    small = "import numpy as np\ndef f(x):\n    y = np.clip(x, 1e-9, 1e-6)\n    return np.log(1 + y)\n"
    assert codes(small) == ["CH101"]
    large = "import numpy as np\ndef f(x):\n    y = np.clip(x, 1.0, 10.0)\n    return np.log(1 + y)\n"
    assert codes(large) == []


def test_inputs_are_sampled_where_the_code_is_defined() -> None:
    # log(1 - exp(x)) is defined only for x < 0 (a log-likelihood); for x → -∞, 1 - exp(x) rounds to 1 and the
    # result (≈ -exp(x)) loses every digit (Mächler's note on log1mexp, from memory; mpmath in test_formats)
    (f,) = analysed("import numpy as np\ndef f(llf):\n    return np.log(1 - np.exp(llf))\n").report.findings
    assert f.code == "CH101" and f.worst_at["llf"] < 0 and f.inputs["llf"].high < 0


# ---- quiet when unsure -------------------------------------------------------------------------------------------
def test_a_loss_only_at_the_ends_of_an_assumed_range_is_information() -> None:
    # sqrt(x + 1) - sqrt(x) loses about log10(4x) digits (common practice): over 1e-6..1e6 that reaches
    # 6.6 digits only toward x = 1e6; at ordinary magnitudes (≤ 1e3) at most 3.6
    (f,) = analysed("import math\ndef f(x):\n    return math.sqrt(x + 1) - math.sqrt(x)\n").report.findings
    assert f.severity == "info" and "declare the real range" in f.message and "`x`" in f.message
    (g,) = analysed("import math\ndef f(x):  # condhint: 1e5 <= x <= 1e6\n"
                    "    return math.sqrt(x + 1) - math.sqrt(x)\n").report.findings
    assert g.severity == "warning" and "declare" not in g.message


def test_a_loss_at_ordinary_magnitudes_keeps_its_severity() -> None:
    # 1 - cos(x) loses about log10(2/x²) digits for small x (NIST DLMF 4.21 half-angle form as the remedy): 6.3 at
    # x = 1e-3, an ordinary magnitude
    (f,) = analysed("import math\ndef f(x):\n    return 1 - math.cos(x)\n").report.findings
    assert f.severity in ("warning", "error") and "declare" not in f.message


def test_ranges_are_named_declared_inferred_or_assumed_in_json() -> None:
    rep = analysed("import math\ndef f(x, y):  # condhint: 1e-9 <= y <= 1e-6\n    assert x > 1\n"
                   "    return math.exp(y) - 1 + x - x\n").report
    doc = rep.findings[0].to_dict()["inputs"]
    assert doc["y"]["source"] == "declared" and doc["x"]["source"] == "inferred (assert)"


# ---- categories ----------------------------------------------------------------------------------------------------
def test_inf_times_zero_is_an_overflow_not_a_domain_error() -> None:
    # exp(750) overflows binary64 (largest 1.8e308, IEEE 754-2019) and exp(-750) underflows to 0: inf * 0 = nan
    (f,) = analysed("import math\ndef f(x):  # condhint: 750 <= x <= 800\n"
                    "    return math.exp(x) * math.exp(-x) * x\n").report.findings
    assert f.code == "CH301" and f.expression == "math.exp(x)"


def test_finfo_limits_are_the_format_records_constants() -> None:
    # np.finfo(float).eps is 2**-52 and np.finfo(np.float32).tiny 2**-126 (IEEE 754-2019; numpy's finfo)
    import numpy as np

    (site,) = analysed("import numpy as np\ndef f(x):\n    return (1 + np.finfo(float).eps) * x "
                       "- x * np.finfo(np.float32).tiny\n").sites
    consts = sorted(n.value for n in topological(site.root) if n.kind == "const")
    assert consts == sorted([1.0, float(np.finfo(float).eps), float(np.finfo(np.float32).tiny)])
    assert set(site.ranges) == {"x"}  # no input stands for the limits


def test_arange_of_names_gives_integers() -> None:
    assert codes("import numpy as np\ndef f(k, m: int):\n    n = np.arange(k)[0]\n    return (n + m * 1.0) - n\n") == []
    assert codes("import numpy as np\ndef f(k, m):\n    n = np.arange(0.5, k)[0]\n    return (n + m * 1.0) - n\n") == \
        ["CH101"]


def test_integer_bookkeeping_below() -> None:
    # `size - 128`, `n - 1`, `k * m + 2`: names and integer literals only, exact for the integers they usually
    # hold; reported only when every input's range is declared
    assert codes("def f(size):\n    return size - 128\n") == []
    assert codes("def f(size):  # condhint: 127.99 <= size <= 128.01\n    return size - 128\n") == ["CH201"]
    assert codes("def f(size):  # condhint: 127.99 <= size <= 128.01\n    return size - 128.0\n") == ["CH201"]


def test_comparisons_decide_branches_and_are_not_analysed() -> None:
    # sqrt(x + 1) - sqrt(x) loses about log10(4x) digits (common practice): 6 at x = 1e6 as a result, nothing
    # reported where it only decides a branch (a convergence test against a tolerance)
    decl = "import math\ndef f(x, tol):  # condhint: 1e5 <= x <= 1e6\n"
    assert codes(decl + "    if math.sqrt(x + 1) - math.sqrt(x) <= tol:\n        return x\n    return tol\n") == []
    assert codes(decl + "    return math.sqrt(x + 1) - math.sqrt(x)\n") == ["CH101"]


def test_numbers_of_an_arithmetic_context_are_not_binary64() -> None:
    # mpmath's functions take a context `ctx` whose numbers have their own precision and an unbounded exponent
    assert codes("def f(ctx, k):\n    return ctx.mpf(2) ** (-k) - ctx.eps\n") == []
    assert codes("def f(obj, k):\n    return (obj.scale + k * 1.0) - obj.scale\n") == ["CH101"]


def test_powers_of_integer_bookkeeping_and_angle_conversions() -> None:
    # `2 ** nbits` is a Python integer (no overflow); math.radians(15) is a constant (math docs)
    assert codes("def f(nbits):\n    return 2 ** nbits\n") == []
    (site,) = analysed("import math\ndef f(x):\n    c = math.cos(math.radians(15))\n    return (1 - c) * x\n").sites
    assert set(site.ranges) == {"x"}  # no input stands for math.radians(15)


def test_modules_of_symbolic_numbers_report_only_declared_expressions() -> None:
    # in a module importing sympy, `x` may be a Symbol and `S.Half` a Rational: nothing is reported on guesses
    body = "def f(x, y):{decl}\n    return (x + y * 1.0) - x\n"
    assert codes("import sympy\n" + body.format(decl="")) == []
    assert codes("import sympy\n" + body.format(decl="  # condhint: 1e6 <= x <= 1e7, 1e-6 <= y <= 1e-5")) == \
        ["CH101"]
    assert codes(body.format(decl="")) == ["CH101"]


def test_a_guard_on_a_reduction_does_not_stop_the_analysis() -> None:
    # found on real code (scipy): a branch on np.min(x) holds a scalar expression; the guard cannot filter its
    # samples and the expression is analysed as if unguarded (log(1 + y) loses digits for small y: Goldberg 1991)
    src = "import numpy as np\ndef f(x, y):  # condhint: 1e-9 <= y <= 1e-6\n    if np.min(x) > 0.5:\n" \
          "        return np.log(1 + y)\n    return y\n"
    assert codes(src) == ["CH101"]


def test_arange_elements_are_bounded_by_its_stop() -> None:
    # np.arange(n) holds 0 … n - 1 (numpy's documentation): with n in [16, 127] its elements are at most 126
    (site,) = analysed("import numpy as np\ndef f():\n    for n in (16, 127):\n"
                       "        x = np.arange(n) * 2.5 / n\n        y = np.sin(x) * 1.5\n    return y\n").sites
    assert site.ranges["np.arange(n)"].interval.high == 126.0


# ---- values the code states: constant loop bounds, grids, literal arrays and lists ---------------------------------
def test_a_comprehension_over_a_constant_range_bounds_its_counter() -> None:
    # `(-alpha)**i` with alpha = 1 - 1e-6 rounded: the relative error of alpha grows about i-fold, so at i ≤ 99 the
    # loss stays under 2 digits (the first-order bound i·u, Higham 2002 §3.1); at i ≈ 1e6 it is ~6 digits.
    src = """
        import numpy as np
        def f():
            n = 100
            alpha = 1 - 1e-6
            return np.array([(-alpha)**i for i in range({bound})])
    """
    assert codes(src.replace("{bound}", "n"), "warning") == []
    (site,) = [s for s in analysed(src.replace("{bound}", "n")).sites if "alpha)**i" in s.root.text]
    assert (site.ranges["i"].interval.low, site.ranges["i"].interval.high) == (0.0, 99.0)


def test_an_inner_loop_never_samples_its_counter_past_the_outer_one() -> None:
    src = """
        def f(x, n):
            s = 0.0
            for i in range(n):
                for k in range(0, i + 1):
                    s += x ** (i - k)
            return s
    """
    texts = {flt.condition.text for s in analysed(src).sites for flt in s.filters}
    assert "k < i + 1" in texts


@pytest.mark.parametrize("make, low, high", [
    ("np.arange(3, 20)", 3.0, 19.0), ("np.arange(-10, 10)", -10.0, 9.0), ("np.arange(1, m + 1)", 1.0, 20.0),
    ("np.linspace(0, 2 * np.pi, 50)", 0.0, 2 * 3.141592653589793), ("np.array([0.1, 0.2, 5, 11])", 0.1, 11.0),
])
def test_values_the_code_spells_out_bound_their_range(make: str, low: float, high: float) -> None:
    src = f"import numpy as np\ndef f():\n    m = 20\n    x = {make}\n    return x * 0.5 + 1.0\n"
    (site,) = [s for s in analysed(src).sites if s.root.text == "x * 0.5 + 1.0"]
    ((lo, hi, source),) = [(r.interval.low, r.interval.high, r.source) for r in site.ranges.values()]
    assert (lo, hi) == pytest.approx((low, high)) and source == "literal"


def test_a_literal_array_is_sampled_at_its_own_values() -> None:
    # log(cos(y)) at y = 0.1, 0.2, 0.3, 5, 11, 20: cos is positive at every one of them (cos 11 ≈ 0.0044,
    # from memory; checked with math.cos below), so the code is defined there although cos < 0 between 2 and 4.
    import math
    ys = [0.1, 0.2, 0.3, 5, 11, 20]
    assert all(math.cos(y) > 0 for y in ys)
    src = f"import numpy as np\ndef f():\n    y = np.array({ys})\n    return -np.log(np.cos(y))\n"
    assert "CH302" not in codes(src)
    assert "CH302" in codes("import numpy as np\ndef f():\n    y = np.linspace(0.1, 20, 50)\n"
                            "    return -np.log(np.cos(y))\n")


def test_a_loop_over_literal_floats_takes_those_values() -> None:
    # `for a in [0.1, 3]:` — a is 0.1 or 3, never 1e5 (scipy's fftpack shift test reads like this).
    src = "import numpy as np\ndef f(x):\n    for a in [0.1, 3]:\n        y = np.sin(x + a)\n    return y\n"
    r = inputs_of(src)["a"]
    assert r[:2] == (0.1, 3.0) and not r[3]


def test_python_integer_powers_do_not_overflow() -> None:
    # 2**ndim with an integer ndim is a Python int (exact at any size), and int / int is correctly rounded however
    # large the operands (the language reference, "Binary arithmetic operations"); 2.0**ndim overflows past
    # ndim = 1023 (IEEE 754 binary64's largest exponent) although the quotient is about 1.
    assert 2**1100 / (2**1100 + 1) == 1.0
    src = "class R:\n    def w(self):\n        return 2{dot}**self.ndim / (2{dot}**self.ndim + 1)\n"
    assert "CH301" not in codes(src.format(dot=""))
    assert "CH301" in codes(src.format(dot=".0"))


def test_an_internal_error_while_reading_is_one_ch001_not_a_crash(monkeypatch) -> None:
    # Fault injection: the reader fails on the second definition. The run goes on; the failure is reported once,
    # as CH001 naming what was not analysed, and the other definition is still analysed.
    from condhint.reading import statements

    real = statements.Walker.function

    def failing(self, fn, *args, **kwargs):
        if fn.name == "broken":
            raise KeyError("boom")
        return real(self, fn, *args, **kwargs)

    monkeypatch.setattr(statements.Walker, "function", failing)
    src = "import math\ndef ok(x):\n    return math.sqrt(x + 1) - math.sqrt(x)\ndef broken(y):\n    return y - 1\n"
    found = analysed(src).report.findings
    assert [f.code for f in found if f.code == "CH001"] == ["CH001"]
    (ch001,) = [f for f in found if f.code == "CH001"]
    assert "internal error" in ch001.message and "KeyError" in ch001.message and ch001.span.line == 4
    assert any(f.code == "CH101" and f.span.line == 3 for f in found)


@pytest.mark.parametrize("kind, fires", [("int", False), ("Optional[int]", False), ("int, optional", False),
                                         ("float", True), ("int or float", True)])
def test_a_numpydoc_type_line_of_int_makes_an_integer(kind: str, fires: bool) -> None:
    # (n + m * 1.0) - n is exact for integers below 2**53 (as above); numpydoc's "name : type" line (numpydoc
    # format guide, "Parameters") is how numeric libraries state a parameter's type without annotations.
    src = f'''
        def f(n, m):
            """Offsets.

            Parameters
            ----------
            n : {kind}
                A count.
            m : {kind}
                Another.
            """
            return {CANCELS}
    '''
    assert (codes(src) == ["CH101"]) is fires
