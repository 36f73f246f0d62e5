"""Code that computes in binary32, binary16 or bfloat16 is evaluated in that format (numpy's own arithmetic,
ml_dtypes' for bfloat16), and its losses are counted in that format's digits.

Check values come from outside condhint: numpy's float32/float16 arithmetic, ml_dtypes' bfloat16, mpmath at 60
digits, IEEE 754-2019's format parameters, and NumPy's promotion rules (NEP 50) as the installed numpy applies
them.
"""
from __future__ import annotations

import math
import textwrap
from dataclasses import replace

import ml_dtypes
import mpmath
import numpy as np
import pytest

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.expr import INPUT, Node
from condhint.fixing import attach_fixes
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import forward
from condhint.numeric.formats import BFLOAT16, BINARY16, BINARY32, BINARY64

CFG = Config(kappa_formula=False)


def analysed(src: str, cfg: Config = CFG):
    return analyse_module(textwrap.dedent(src), "r.py", cfg, cache=None)


def findings(src: str, cfg: Config = CFG):
    return analysed(src, cfg).report.findings


def digits_lost(value: float, exact: mpmath.mpf, fmt) -> float:
    """log10(relative error / u) in `fmt` (design §2), against an mpmath value."""
    err = abs((mpmath.mpf(value) - exact) / exact)
    return max(0.0, float(mpmath.log10(max(err, fmt.unit_roundoff) / fmt.unit_roundoff)))


# ---- single operations, as numpy and ml_dtypes compute them ------------------------------------------------
@pytest.mark.parametrize("fmt, dtype", [(BINARY32, np.float32), (BINARY16, np.float16),
                                        (BFLOAT16, ml_dtypes.bfloat16)])
@pytest.mark.parametrize("kind", ["add", "sub", "mul", "div", "sqrt", "exp", "log"])
def test_one_operation_in_a_format_is_that_formats_own_arithmetic(fmt, dtype, kind: str) -> None:
    rng = np.random.default_rng(7)
    xs = fmt.round(rng.uniform(0.5, 8.0, 64))  # numbers of the format (inputs are exact in it)
    ys = fmt.round(rng.uniform(0.5, 8.0, 64))
    x = Node(INPUT, name="x", format=fmt, weak=False)
    y = Node(INPUT, name="y", format=fmt, weak=False)
    binary = kind in ("add", "sub", "mul", "div")
    node = Node(kind, (x, y) if binary else (x,), format=fmt, weak=False)
    got = forward([x, y, node] if binary else [x, node], {"x": xs, "y": ys}, F64_BACKEND, 64)[id(node)]
    ufunc = {"add": np.add, "sub": np.subtract, "mul": np.multiply, "div": np.divide, "sqrt": np.sqrt,
             "exp": np.exp, "log": np.log}[kind]
    a, b = xs.astype(dtype), ys.astype(dtype)
    expected = (ufunc(a, b) if binary else ufunc(a)).astype(float)  # numpy's (ml_dtypes') own result
    assert np.array_equal(got, expected)


def test_binary16_limits_are_ieee_754s() -> None:
    # IEEE 754-2019 binary16: largest 65504, smallest normal 2**-14; numpy rounds 65520 up to inf (ties to even)
    assert BINARY16.round([65504.0, 65519.0, 65520.0]).tolist() == [65504.0, 65504.0, math.inf]
    assert BINARY16.round([2.0**-14, 2.0**-25]).tolist() == [2.0**-14, 0.0]


# ---- the classic cases in binary32 ---------------------------------------------------------------------------
def test_one_plus_x_minus_one_loses_everything_in_binary32_but_half_in_binary64() -> None:
    # in binary32 1 + 1e-8 == 1 (u = 2**-24 ≈ 6e-8), in binary64 it keeps 8 of 16 digits (common practice)
    (f32,) = findings("""
        import numpy as np
        def f(x: np.float32):  # condhint: 1e-8 <= x <= 2e-8
            return (1 + x) - 1
        """)
    assert (f32.code, f32.format) == ("CH101", "binary32")
    assert f32.digits_lost == pytest.approx(BINARY32.digits, abs=0.05)
    assert "of 7.2 digits in float32" in f32.message
    (f64,) = findings("""
        def f(x):  # condhint: 1e-8 <= x <= 2e-8
            return (1 + x) - 1
        """)
    assert f64.format == "binary64" and 7.5 < f64.digits_lost < 8.5 and "of 16 digits" in f64.message


@pytest.mark.parametrize("formula, exact, lo, hi", [
    ("np.log(1 + x)", mpmath.log1p, 1e-6, 1e-4),           # Goldberg 1991: log1p for small x
    ("np.exp(x) - 1", mpmath.expm1, 1e-6, 1e-4),           # Goldberg 1991; ISO C99 expm1
    ("1 - np.cos(x)", lambda x: 2 * mpmath.sin(x / 2) ** 2, 1e-3, 1e-2),  # NIST DLMF 4.21 (half angle)
])
def test_classic_losses_are_measured_in_binary32(formula: str, exact, lo: float, hi: float) -> None:
    src = f"""
        import numpy as np
        def f(x: np.float32):  # condhint: {lo} <= x <= {hi}
            return {formula}
        """
    (f,) = findings(src)
    assert f.code == "CH101" and f.format == "binary32"
    # the figure is numpy's own float32 result against mpmath at the reported point
    x = np.float32(f.worst_at["x"])
    value = {"np.log(1 + x)": lambda: np.log(np.float32(1) + x), "np.exp(x) - 1": lambda: np.exp(x) - np.float32(1),
             "1 - np.cos(x)": lambda: np.float32(1) - np.cos(x)}[formula]()
    assert value.dtype == np.float32
    with mpmath.workdps(60):
        expected = digits_lost(float(value), exact(mpmath.mpf(float(x))), BINARY32)
    assert f.digits_lost == pytest.approx(expected, abs=0.3)
    ma = analysed(src)
    attach_fixes(ma, CFG)
    (g,) = ma.report.findings
    assert g.fixes and g.fixes[0].replacement.startswith(("np.", "2 *"))  # numpy keeps binary32
    assert g.fixes[0].measured_digits_lost_after < 1.0


def test_quadratic_root_cancels_in_binary32() -> None:
    # Forsythe 1966: -b + sqrt(b*b - 4ac) cancels for b*b >> 4ac; in binary32 already at b = 1e3
    (f,) = findings("""
        import numpy as np
        def root(a: np.float32, b: np.float32, c: np.float32):  # condhint: 0.5 <= a <= 2, 1e3 <= b <= 1e4, 0.5 <= c <= 2
            return (-b + np.sqrt(b * b - 4 * a * c)) / (2 * a)
        """)
    assert f.code == "CH101" and f.format == "binary32" and f.digits_lost > 5


def test_logistic_loss_saturates_to_zero_in_binary32() -> None:
    # log(1 + exp(-z)): for z > 17, exp(-z) < u32 and 1 + exp(-z) == 1, so the loss is 0 instead of ~exp(-z)
    z = np.float32(20.0)
    assert np.log(np.float32(1) + np.exp(-z)) == 0.0  # numpy's own float32 arithmetic
    (f,) = findings("""
        import numpy as np
        def loss(z: np.float32):  # condhint: 18 <= z <= 30
            return np.log(1 + np.exp(-z))
        """)
    assert f.code == "CH101" and f.format == "binary32" and f.digits_lost == pytest.approx(BINARY32.digits, abs=0.05)


# ---- overflow in binary16 --------------------------------------------------------------------------------------
def test_softplus_overflows_in_binary16_but_not_in_binary32() -> None:
    # exp(11.1) ≈ 66,000 > 65504, binary16's largest (IEEE 754-2019); binary32 holds it
    src = """
        import numpy as np
        def softplus(x: np.{t}):  # condhint: 11.5 <= x <= 15
            return np.log(1 + np.exp(x))
        """
    (f,) = findings(src.format(t="float16"))
    assert (f.code, f.format, f.expression) == ("CH301", "binary16", "np.exp(x)")
    assert "overflows to inf in float16" in f.message
    assert findings(src.format(t="float32")) == []


def test_sum_of_squares_overflows_in_binary16() -> None:
    # 300**2 = 90000 > 65504: the norm (≈ 424) is ordinary, the squares are not (binary16)
    (f,) = findings("""
        import numpy as np
        def norm(x: np.float16, y: np.float16):  # condhint: 200 <= x <= 300, 200 <= y <= 300
            return np.sqrt(x * x + y * y)
        """)
    assert f.code == "CH301" and f.format == "binary16"
    with np.errstate(over="ignore"):
        assert np.isinf(np.float16(300) * np.float16(300))  # numpy's own binary16


# ---- which format the code computes in ----------------------------------------------------------------------------
def root_format(src: str, cfg: Config = CFG):
    (site,) = analysed(src, cfg).sites
    return site.float_format


@pytest.mark.parametrize("expr, expected", [
    ("np.float32(x) * 0.1", np.float32(1) * 0.1),                      # NEP 50: a Python float does not widen
    ("np.float32(x) * np.float64(y)", np.float32(1) * np.float64(1)),  # two numpy values: the wider one
    ("np.float16(x) + np.float16(y)", np.float16(1) + np.float16(1)),
    ("x * 0.1 + y", 1.0 * 0.1 + 1.0),                                  # Python floats: binary64
    ("math.sqrt(np.float32(x)) + y", math.sqrt(np.float32(2)) + 1.0),  # math works in binary64
    ("np.sqrt(np.float32(x)) + y", np.sqrt(np.float32(2)) + 1.0),
    ("x.astype(np.float16) * 3.0", np.ones(1).astype(np.float16) * 3.0),
    ("np.asarray(x, dtype=np.float32) - 1.5", np.asarray(1.0, dtype=np.float32) - 1.5),
    ("np.float16(x) + ml_dtypes.bfloat16(y)", np.float16(1) + ml_dtypes.bfloat16(1)),  # ml_dtypes: binary32
])
def test_operations_compute_in_the_format_numpy_promotes_to(expr: str, expected) -> None:
    fmt = root_format(f"""
        import math
        import ml_dtypes
        import numpy as np
        def f(x, y):  # condhint: 1 <= x <= 2, 1 <= y <= 2
            return {expr}
        """)
    want = {np.dtype(np.float64): BINARY64, np.dtype(np.float32): BINARY32, np.dtype(np.float16): BINARY16}
    assert fmt is want[np.asarray(expected).dtype]


def test_annotations_and_dtype_arguments_set_the_format() -> None:
    assert root_format("""
        import numpy as np
        import numpy.typing as npt
        def f(x: npt.NDArray[np.float32], y: npt.NDArray[np.float64]):
            return x + y
        """) is BINARY64  # a float32 array and a float64 array: float64
    assert root_format("""
        import numpy as np
        import numpy.typing as npt
        def f(x: npt.NDArray[np.float16]):
            return np.exp(x) - 1.0
        """) is BINARY16
    assert root_format("""
        import numpy as np
        def f(x):
            return np.exp(x, dtype=np.float32) - 1.0
        """) is BINARY32


def test_a_configured_default_format_types_what_the_code_does_not() -> None:
    src = """
        def f(x):  # condhint: 1e-6 <= x <= 1e-4
            return (1 + x) - 1
        """
    assert root_format(src) is BINARY64
    assert root_format(src, replace(CFG, float_format="float32")) is BINARY32
    (f,) = findings(src, replace(CFG, float_format="float32"))
    assert f.format == "binary32" and f.digits_lost > 4


# ---- remedies in the code's format ----------------------------------------------------------------------------
def test_a_wider_format_remedy_where_no_rewrite_helps() -> None:
    # a*b - c*d of close binary32 numbers: its products round in binary32 (u = 2**-24); computed in binary64
    # they are exact (24 + 24 significand bits < 53) and the result rounds once (IEEE 754-2019; Higham 2002 ch. 2)
    src = textwrap.dedent("""
        import numpy as np
        def det(a: np.float32, b: np.float32, c: np.float32, d: np.float32):  # condhint: 1e3 <= a <= 1.001e3, 1e3 <= b <= 1.001e3, 1e3 <= c <= 1.001e3, 1e3 <= d <= 1.001e3
            return a * b - c * d
        """)
    ma = analysed(src)
    attach_fixes(ma, CFG)
    (f,) = [x for x in ma.report.findings if x.code == "CH101"]
    assert f.format == "binary32"
    (fix,) = [x for x in f.fixes if x.rule == "wider-format"]
    assert fix.replacement == "np.float32(np.float64(a) * np.float64(b) - np.float64(c) * np.float64(d))"
    # numpy's own evaluation of the original and of the fix at the reported point, against mpmath
    a, b, c, d = (np.float32(f.worst_at[k]) for k in "abcd")
    original = a * b - c * d
    fixed = np.float32(np.float64(a) * np.float64(b) - np.float64(c) * np.float64(d))
    assert original.dtype == fixed.dtype == np.float32
    with mpmath.workdps(60):
        exact = mpmath.mpf(float(a)) * float(b) - mpmath.mpf(float(c)) * float(d)
        assert digits_lost(float(fixed), exact, BINARY32) < 0.5
        assert digits_lost(float(original), exact, BINARY32) == pytest.approx(f.digits_lost, abs=0.3)
    assert fix.measured_digits_lost_after < 0.5
    from condhint.rewrites import apply_fixes

    # the fixed code, read again, computes in binary64 and loses nothing to rounding; what remains is the
    # problem's own sensitivity to its (close) inputs, κ = (|ab| + |cd|) / |ab − cd| (common practice)
    assert [g.code for g in findings(apply_fixes(src, [fix]))] == ["CH201"]


def test_binary64_code_is_never_offered_a_wider_format() -> None:
    ma = analysed("""
        import math
        def f(x):  # condhint: 1e-9 <= x <= 1e-6
            return math.exp(x) - 1
        """)
    attach_fixes(ma, CFG)
    (f,) = ma.report.findings
    assert f.format == "binary64" and f.fixes and all(x.rule != "wider-format" for x in f.fixes)


def test_accurate_reduced_precision_code_is_not_reported() -> None:
    # must not fire: a product and a sum of positive binary32 numbers lose at most a few ulps
    assert findings("""
        import numpy as np
        def f(x: np.float32, y: np.float32):  # condhint: 1 <= x <= 100, 1 <= y <= 100
            return x * y + np.sqrt(x)
        """) == []
