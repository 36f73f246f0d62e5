"""The registry: one `Operation` record per operation a site can contain (arithmetic and elementary functions).

Each record holds its spellings (how source code calls it), its evaluation in a number format (numpy) and in
mpmath, its partial derivatives (against the backend interface of `backends`), its rounding, its domain, its
sympy form and its spelling in generated code. To add an operation: one record here and one test in
tests/engine/test_operations.py (every record is checked there against numpy, mpmath and sympy).
"""
from __future__ import annotations

import math
from typing import Any, Sequence

import mpmath
import numpy as np

from condhint.numeric.backends import _vec as v
from condhint.numeric.operation import (BINARY, CORRECT, EXACT, FOLDED, UNARY, Array, Operation, Signature, Spellings,
                                        codegen_class, quiet, same_name, sympy_attr)


def _mp_copysign(a: Any, b: Any) -> Any:
    return abs(a) if (b > 0 or (b == 0 and not mpmath.isnan(b))) else -abs(a)


def _logaddexp(a: Any, b: Any) -> Any:
    m = max(a, b)
    return m + mpmath.log(mpmath.exp(a - m) + mpmath.exp(b - m))


_BEYOND = 16384  # log2 of binary128's range: a power beyond it is inf or 0 for every format we model
SATURATED = mpmath.mpf(2) ** _BEYOND  # a power whose size is beyond it is computed as ±inf (±0 under its inverse)


def _mp_pow(a: Any, b: Any) -> Any:
    """a ** b in mpmath, saturated to ±inf or ±0 when |b log2 |a|| exceeds 2**14: mpmath computes such powers
    exactly first (x ** 2**20 takes seconds), and no binary format holds them."""
    if isinstance(a, mpmath.mpf) and isinstance(b, mpmath.mpf) and abs(b) > 64 and a != 0 and mpmath.isfinite(a) \
            and mpmath.isfinite(b):
        t = b * mpmath.log(abs(a), 2)
        if abs(t) > _BEYOND:
            if a < 0 and not mpmath.isint(b):
                return mpmath.mpf("nan")
            odd = b._mpf_[2] == 0  # an integer b = man·2**exp with odd man is odd exactly when exp is 0
            sign = -1 if a < 0 and odd else 1
            return sign * (mpmath.inf if t > 0 else mpmath.mpf(0))
    return a ** b


def _pow_partials(B: Any, a: Sequence[Array], out: Array) -> tuple[Any, ...]:
    base, expo = a
    positive = B.where(base > 0, True, False)
    safe = B.where(positive, base, 1.0)
    return expo * B.where(base != 0, out / B.where(base != 0, base, 1.0), 0.0), B.where(positive, out * B.log(safe), 0.0)


def _clip_partials(B: Any, a: Sequence[Array], out: Array) -> tuple[Any, ...]:
    """clip(x, lo, hi) = min(max(x, lo), hi): follows x inside [lo, hi], else the bound it is clipped to."""
    x, lo, hi = a
    inner = B.where(B.where(x > lo, x, lo) < hi, 1.0, 0.0)  # ∂/∂max(x, lo): the upper bound does not bind
    return inner * B.where(x > lo, 1.0, 0.0), inner * B.where(x < lo, 1.0, 0.0), 1.0 - inner


def _sel(B: Any, cond: Array) -> tuple[Array, Array]:
    return B.where(cond, 1.0, 0.0), B.where(cond, 0.0, 1.0)


def _both(name: str, scipy: tuple[str, ...] = ()) -> Spellings:
    """Spelled `name` in math and numpy (and as given in scipy.special)."""
    return Spellings(math=(name,), numpy=(name,), scipy_special=scipy)


def _inverse(name: str) -> Spellings:
    """An inverse function: `asin` in math, `arcsin` (and numpy 2's `asin`) in numpy."""
    return Spellings(math=(name,), numpy=("arc" + name[1:], name))


_TWO_OVER_SQRT_PI = 2.0 / np.sqrt(np.pi)
_POSITIVE = "x > 0"
_UNIT = "−1 ≤ x ≤ 1"
_sympy, _codegen, _np = sympy_attr, codegen_class, quiet


def _record_list() -> list[Operation]:
    return [
        Operation("add", "the addition", BINARY, _np(np.add), lambda a, b: a + b, lambda B, a, o: (1.0, 1.0),
                  CORRECT, sympy=lambda sp: lambda a, b: a + b, spellings=Spellings(numpy=("add",))),
        Operation("sub", "the subtraction", BINARY, _np(np.subtract), lambda a, b: a - b,
                  lambda B, a, o: (1.0, -1.0), CORRECT, sympy=lambda sp: lambda a, b: a - b,
                  spellings=Spellings(numpy=("subtract",))),
        Operation("mul", "the multiplication", BINARY, _np(np.multiply), lambda a, b: a * b,
                  lambda B, a, o: (a[1], a[0]), CORRECT, sympy=lambda sp: lambda a, b: a * b,
                  spellings=Spellings(numpy=("multiply",))),
        Operation("div", "the division", BINARY, _np(np.divide), v(lambda a, b: a / b, 2),
                  lambda B, a, o: (1.0 / a[1], -o / a[1]), CORRECT, sympy=lambda sp: lambda a, b: a / b,
                  spellings=Spellings(numpy=("divide", "true_divide"))),
        Operation("pow", "the power", BINARY, _np(np.power), v(_mp_pow, 2), _pow_partials,
                  domain="a positive base (or an integer exponent)", sympy=lambda sp: lambda a, b: a**b,
                  spellings=Spellings(math=("pow",), numpy=("power", "float_power", "pow"), builtins=("pow",))),
        Operation("neg", "the negation", UNARY, _np(np.negative), lambda a: -a, lambda B, a, o: (-1.0,), EXACT,
                  sympy=lambda sp: lambda a: -a, spellings=Spellings(numpy=("negative",))),
        Operation("abs", "abs", UNARY, _np(np.abs), v(abs), lambda B, a, o: (B.sign(a[0]),), EXACT, keeps_integers=True,
                  sympy=_sympy("Abs"), generated={"builtins": "abs"},
                  spellings=Spellings(math=("fabs",), numpy=("abs", "absolute", "fabs"), builtins=("abs",))),
        Operation("sqrt", "sqrt", UNARY, _np(np.sqrt), v(mpmath.sqrt), lambda B, a, o: (0.5 / o,), CORRECT,
                  domain="x ≥ 0", valid=lambda x: x >= 0, sympy=_sympy("sqrt"), spellings=_both("sqrt"),
                  generated=same_name("sqrt")),
        Operation("cbrt", "cbrt", UNARY, _np(np.cbrt), v(mpmath.cbrt), lambda B, a, o: (o / (3.0 * a[0]),),
                  sympy=lambda sp: lambda a: sp.root(a, 3), sympy_named=_codegen("cfunctions", "Cbrt"),
                  spellings=_both("cbrt", ("cbrt",)), generated={"numpy": "cbrt"}),
        Operation("exp", "exp", UNARY, _np(np.exp), v(mpmath.exp), lambda B, a, o: (o,), sympy=_sympy("exp"),
                  spellings=_both("exp"), generated=same_name("exp")),
        Operation("exp2", "exp2", UNARY, _np(np.exp2), v(lambda x: mpmath.mpf(2) ** x), lambda B, a, o: (o * B.ln2,),
                  sympy=lambda sp: lambda a: sp.Integer(2) ** a, sympy_named=_codegen("cfunctions", "exp2"),
                  spellings=_both("exp2", ("exp2",)), generated={"numpy": "exp2"}),
        Operation("expm1", "expm1", UNARY, _np(np.expm1), v(mpmath.expm1), lambda B, a, o: (o + 1.0,),
                  sympy=lambda sp: lambda a: sp.exp(a) - 1, sympy_named=_codegen("cfunctions", "expm1"),
                  spellings=_both("expm1", ("expm1",)), generated=same_name("expm1")),
        Operation("log", "log", UNARY, _np(np.log), v(mpmath.log), lambda B, a, o: (1.0 / a[0],),
                  domain=_POSITIVE, valid=lambda x: x > 0, sympy=_sympy("log"), spellings=_both("log"),
                  generated=same_name("log")),
        Operation("log2", "log2", UNARY, _np(np.log2), v(lambda x: mpmath.log(x, 2)),
                  lambda B, a, o: (1.0 / (a[0] * B.ln2),), domain=_POSITIVE, valid=lambda x: x > 0,
                  sympy=lambda sp: lambda a: sp.log(a, 2), sympy_named=_codegen("cfunctions", "log2"),
                  spellings=_both("log2"), generated=same_name("log2")),
        Operation("log10", "log10", UNARY, _np(np.log10), v(mpmath.log10), lambda B, a, o: (1.0 / (a[0] * B.ln10),),
                  domain=_POSITIVE, valid=lambda x: x > 0, sympy=lambda sp: lambda a: sp.log(a, 10),
                  sympy_named=_codegen("cfunctions", "log10"), spellings=_both("log10"),
                  generated=same_name("log10")),
        Operation("log1p", "log1p", UNARY, _np(np.log1p), v(mpmath.log1p), lambda B, a, o: (1.0 / (1.0 + a[0]),),
                  domain="x > −1", valid=lambda x: x > -1, sympy=lambda sp: lambda a: sp.log(1 + a),
                  sympy_named=_codegen("cfunctions", "log1p"), spellings=_both("log1p", ("log1p",)),
                  generated=same_name("log1p")),
        Operation("sin", "sin", UNARY, _np(np.sin), v(mpmath.sin), lambda B, a, o: (B.cos(a[0]),),
                  sympy=_sympy("sin"), sympy_named=_sympy("sin"), spellings=_both("sin"), generated=same_name("sin")),
        Operation("cos", "cos", UNARY, _np(np.cos), v(mpmath.cos), lambda B, a, o: (-B.sin(a[0]),),
                  sympy=_sympy("cos"), sympy_named=_sympy("cos"), spellings=_both("cos"), generated=same_name("cos")),
        Operation("tan", "tan", UNARY, _np(np.tan), v(mpmath.tan), lambda B, a, o: (1.0 + o * o,),
                  sympy=_sympy("tan"), sympy_named=_sympy("tan"), spellings=_both("tan"), generated=same_name("tan")),
        Operation("asin", "asin", UNARY, _np(np.arcsin), v(mpmath.asin),
                  lambda B, a, o: (1.0 / B.sqrt(1.0 - a[0] * a[0]),), domain=_UNIT, valid=lambda x: np.abs(x) <= 1,
                  sympy=_sympy("asin"), sympy_named=_sympy("asin"), spellings=_inverse("asin"),
                  generated=same_name("asin", numpy="arcsin")),
        Operation("acos", "acos", UNARY, _np(np.arccos), v(mpmath.acos),
                  lambda B, a, o: (-1.0 / B.sqrt(1.0 - a[0] * a[0]),), domain=_UNIT, valid=lambda x: np.abs(x) <= 1,
                  sympy=_sympy("acos"), sympy_named=_sympy("acos"), spellings=_inverse("acos"),
                  generated=same_name("acos", numpy="arccos")),
        Operation("atan", "atan", UNARY, _np(np.arctan), v(mpmath.atan), lambda B, a, o: (1.0 / (1.0 + a[0] * a[0]),),
                  sympy=_sympy("atan"), sympy_named=_sympy("atan"), spellings=_inverse("atan"),
                  generated=same_name("atan", numpy="arctan")),
        Operation("atan2", "atan2", BINARY, _np(np.arctan2), v(mpmath.atan2, 2),
                  lambda B, a, o: (a[1] / (a[0] * a[0] + a[1] * a[1]), -a[0] / (a[0] * a[0] + a[1] * a[1])),
                  sympy=_sympy("atan2"), sympy_named=_sympy("atan2"), spellings=_inverse("atan2"),
                  generated=same_name("atan2", numpy="arctan2")),
        Operation("sinh", "sinh", UNARY, _np(np.sinh), v(mpmath.sinh), lambda B, a, o: (B.cosh(a[0]),),
                  sympy=_sympy("sinh"), sympy_named=_sympy("sinh"), spellings=_both("sinh"),
                  generated=same_name("sinh")),
        Operation("cosh", "cosh", UNARY, _np(np.cosh), v(mpmath.cosh), lambda B, a, o: (B.sinh(a[0]),),
                  sympy=_sympy("cosh"), sympy_named=_sympy("cosh"), spellings=_both("cosh"),
                  generated=same_name("cosh")),
        Operation("tanh", "tanh", UNARY, _np(np.tanh), v(mpmath.tanh), lambda B, a, o: (1.0 - o * o,),
                  sympy=_sympy("tanh"), sympy_named=_sympy("tanh"), spellings=_both("tanh"),
                  generated=same_name("tanh")),
        Operation("asinh", "asinh", UNARY, _np(np.arcsinh), v(mpmath.asinh),
                  lambda B, a, o: (1.0 / B.sqrt(a[0] * a[0] + 1.0),), sympy=_sympy("asinh"),
                  sympy_named=_sympy("asinh"), spellings=_inverse("asinh"),
                  generated=same_name("asinh", numpy="arcsinh")),
        Operation("acosh", "acosh", UNARY, _np(np.arccosh), v(mpmath.acosh),
                  lambda B, a, o: (1.0 / B.sqrt(a[0] * a[0] - 1.0),), domain="x ≥ 1", valid=lambda x: x >= 1,
                  sympy=_sympy("acosh"), sympy_named=_sympy("acosh"), spellings=_inverse("acosh"),
                  generated=same_name("acosh", numpy="arccosh")),
        Operation("atanh", "atanh", UNARY, _np(np.arctanh), v(mpmath.atanh),
                  lambda B, a, o: (1.0 / (1.0 - a[0] * a[0]),), domain="−1 < x < 1", valid=lambda x: np.abs(x) < 1,
                  sympy=_sympy("atanh"), sympy_named=_sympy("atanh"), spellings=_inverse("atanh"),
                  generated=same_name("atanh", numpy="arctanh")),
        Operation("hypot", "hypot", FOLDED, _np(np.hypot), v(mpmath.hypot, 2), lambda B, a, o: (a[0] / o, a[1] / o),
                  sympy=lambda sp: lambda a, b: sp.sqrt(a**2 + b**2), sympy_named=_codegen("cfunctions", "hypot"),
                  spellings=_both("hypot"), generated=same_name("hypot")),
        Operation("square", "the square", UNARY, _np(np.square), lambda a: a * a, lambda B, a, o: (2.0 * a[0],),
                  CORRECT, sympy=lambda sp: lambda a: a**2, spellings=Spellings(numpy=("square",))),
        Operation("reciprocal", "the reciprocal", UNARY, _np(lambda x: 1.0 / x), v(lambda x: 1 / x),
                  lambda B, a, o: (-o * o,), CORRECT, sympy=lambda sp: lambda a: 1 / a,
                  spellings=Spellings(numpy=("reciprocal",))),
        Operation("erf", "erf", UNARY, _np(lambda x: np.vectorize(math.erf, otypes=[float])(x)), v(mpmath.erf),
                  lambda B, a, o: (_TWO_OVER_SQRT_PI * B.exp(-a[0] * a[0]),), sympy=_sympy("erf"),
                  sympy_named=_sympy("erf"), spellings=Spellings(math=("erf",), scipy_special=("erf",)),
                  generated={"math": "erf", "scipy.special": "erf"}),
        Operation("erfc", "erfc", UNARY, _np(lambda x: np.vectorize(math.erfc, otypes=[float])(x)), v(mpmath.erfc),
                  lambda B, a, o: (-_TWO_OVER_SQRT_PI * B.exp(-a[0] * a[0]),), sympy=_sympy("erfc"),
                  sympy_named=_sympy("erfc"), spellings=Spellings(math=("erfc",), scipy_special=("erfc",)),
                  generated={"math": "erfc", "scipy.special": "erfc"}),
        Operation("logaddexp", "logaddexp", BINARY, _np(np.logaddexp), v(_logaddexp, 2),
                  lambda B, a, o: (B.exp(a[0] - o), B.exp(a[1] - o)),
                  sympy=lambda sp: lambda a, b: sp.log(sp.exp(a) + sp.exp(b)),
                  sympy_named=_codegen("numpy_nodes", "logaddexp"), spellings=Spellings(numpy=("logaddexp",)),
                  generated={"numpy": "logaddexp"}),
        Operation("copysign", "copysign", BINARY, _np(np.copysign), v(_mp_copysign, 2),
                  lambda B, a, o: (B.sign(a[0]) * B.sign(o), 0.0), EXACT,
                  sympy=lambda sp: lambda a, b: sp.Abs(a) * sp.sign(b), spellings=_both("copysign"),
                  generated=same_name("copysign")),
        Operation("floor", "floor", UNARY, _np(np.floor), v(mpmath.floor), lambda B, a, o: (0.0,), EXACT,
                  sympy=_sympy("floor"), spellings=_both("floor"), generated=same_name("floor")),
        Operation("ceil", "ceil", UNARY, _np(np.ceil), v(mpmath.ceil), lambda B, a, o: (0.0,), EXACT,
                  sympy=_sympy("ceiling"), spellings=_both("ceil"), generated=same_name("ceil")),
        Operation("min", "min", FOLDED, _np(np.minimum), v(min, 2), lambda B, a, o: _sel(B, a[0] <= a[1]), EXACT,
                  keeps_integers=True,
                  sympy=_sympy("Min"), spellings=Spellings(numpy=("minimum", "fmin"), builtins=("min",)),
                  generated={"numpy": "minimum", "builtins": "min"}),
        Operation("max", "max", FOLDED, _np(np.maximum), v(max, 2), lambda B, a, o: _sel(B, a[0] >= a[1]), EXACT,
                  keeps_integers=True,
                  sympy=_sympy("Max"), spellings=Spellings(numpy=("maximum", "fmax"), builtins=("max",)),
                  generated={"numpy": "maximum", "builtins": "max"}),
        Operation("radians", "radians", UNARY, _np(np.radians), v(lambda x: x * mpmath.pi / 180),
                  lambda B, a, o: (B.pi / 180.0,), sympy=lambda sp: lambda a: a * sp.pi / 180,
                  spellings=Spellings(math=("radians",), numpy=("radians", "deg2rad")), generated=same_name("radians")),
        Operation("degrees", "degrees", UNARY, _np(np.degrees), v(lambda x: x * 180 / mpmath.pi),
                  lambda B, a, o: (180.0 / B.pi,), sympy=lambda sp: lambda a: a * 180 / sp.pi,
                  spellings=Spellings(math=("degrees",), numpy=("degrees", "rad2deg")), generated=same_name("degrees")),
        Operation("clip", "clip", Signature(3, 3), _np(np.clip), v(lambda x, a, b: min(max(x, a), b), 3),
                  _clip_partials, EXACT, sympy=lambda sp: lambda x, a, b: sp.Min(sp.Max(x, a), b),
                  spellings=Spellings(numpy=("clip",)), generated={"numpy": "clip"}),
        # A conversion to the node's own format (`np.float32(x)`, `x.astype(np.float16)`, a Python float meeting
        # a binary32 array): the reader writes it, rounding when the format is narrower than the operand's.
        Operation("cast", "the conversion", UNARY, _np(np.asarray), lambda a: a, lambda B, a, o: (1.0,), CORRECT,
                  sympy=lambda sp: lambda a: a, written=False),
    ]


OPERATIONS: dict[str, Operation] = {op.id: op for op in _record_list()}
