"""The operations a site can contain: arithmetic and elementary functions.

Each entry knows how to evaluate itself in binary64 and in mpmath, its local partial derivatives
(written once against the backend interface of `backends`), whether it rounds, and its domain.
To support a new function, add one `Fn` here and its spellings in `reading.names`.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Sequence

import mpmath
import numpy as np

from condhint.numeric.backends import _vec

Array = np.ndarray
Partials = Callable[[Any, Sequence[Array], Array], tuple[Any, ...]]


@dataclass(frozen=True)
class Fn:
    id: str
    arity: int
    label: str  # how messages name the operation
    f64: Callable[..., Array]
    mp: Callable[..., Array]
    partials: Partials
    rounds: bool = True
    domain: str | None = None  # human description of the real domain, for domain findings
    valid: Callable[..., Array] | None = None  # binary64 mask of arguments inside the domain


def _np(fn: Callable[..., Array]) -> Callable[..., Array]:
    def call(*args: Array) -> Array:
        with np.errstate(all="ignore"):
            return fn(*args)

    return call


def _mp_copysign(a: Any, b: Any) -> Any:
    return abs(a) if (b > 0 or (b == 0 and not mpmath.isnan(b))) else -abs(a)


def _logaddexp(a: Any, b: Any) -> Any:
    m = max(a, b)
    return m + mpmath.log(mpmath.exp(a - m) + mpmath.exp(b - m))


_BEYOND = 16384  # log2 of binary128's range: a power beyond it is inf or 0 for every format we model


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


def _sel(B: Any, cond: Array) -> tuple[Array, Array]:
    return B.where(cond, 1.0, 0.0), B.where(cond, 0.0, 1.0)


def _fns() -> dict[str, Fn]:
    v = _vec
    two_over_sqrt_pi = 2.0 / np.sqrt(np.pi)
    table = [
        Fn("add", 2, "the addition", _np(np.add), lambda a, b: a + b, lambda B, a, o: (1.0, 1.0)),
        Fn("sub", 2, "the subtraction", _np(np.subtract), lambda a, b: a - b, lambda B, a, o: (1.0, -1.0)),
        Fn("mul", 2, "the multiplication", _np(np.multiply), lambda a, b: a * b, lambda B, a, o: (a[1], a[0])),
        Fn("div", 2, "the division", _np(np.divide), v(lambda a, b: a / b, 2),
           lambda B, a, o: (1.0 / a[1], -o / a[1])),
        Fn("pow", 2, "the power", _np(np.power), v(_mp_pow, 2), _pow_partials,
           domain="a positive base (or an integer exponent)"),
        Fn("neg", 1, "the negation", _np(np.negative), lambda a: -a, lambda B, a, o: (-1.0,), rounds=False),
        Fn("abs", 1, "abs", _np(np.abs), v(abs), lambda B, a, o: (B.sign(a[0]),), rounds=False),
        Fn("sqrt", 1, "sqrt", _np(np.sqrt), v(mpmath.sqrt), lambda B, a, o: (0.5 / o,),
           domain="x ≥ 0", valid=lambda x: x >= 0),
        Fn("cbrt", 1, "cbrt", _np(np.cbrt), v(mpmath.cbrt), lambda B, a, o: (o / (3.0 * a[0]),)),
        Fn("exp", 1, "exp", _np(np.exp), v(mpmath.exp), lambda B, a, o: (o,)),
        Fn("exp2", 1, "exp2", _np(np.exp2), v(lambda x: mpmath.mpf(2) ** x), lambda B, a, o: (o * B.ln2,)),
        Fn("expm1", 1, "expm1", _np(np.expm1), v(mpmath.expm1), lambda B, a, o: (o + 1.0,)),
        Fn("log", 1, "log", _np(np.log), v(mpmath.log), lambda B, a, o: (1.0 / a[0],),
           domain="x > 0", valid=lambda x: x > 0),
        Fn("log2", 1, "log2", _np(np.log2), v(lambda x: mpmath.log(x, 2)), lambda B, a, o: (1.0 / (a[0] * B.ln2),),
           domain="x > 0", valid=lambda x: x > 0),
        Fn("log10", 1, "log10", _np(np.log10), v(mpmath.log10), lambda B, a, o: (1.0 / (a[0] * B.ln10),),
           domain="x > 0", valid=lambda x: x > 0),
        Fn("log1p", 1, "log1p", _np(np.log1p), v(mpmath.log1p), lambda B, a, o: (1.0 / (1.0 + a[0]),),
           domain="x > −1", valid=lambda x: x > -1),
        Fn("sin", 1, "sin", _np(np.sin), v(mpmath.sin), lambda B, a, o: (B.cos(a[0]),)),
        Fn("cos", 1, "cos", _np(np.cos), v(mpmath.cos), lambda B, a, o: (-B.sin(a[0]),)),
        Fn("tan", 1, "tan", _np(np.tan), v(mpmath.tan), lambda B, a, o: (1.0 + o * o,)),
        Fn("asin", 1, "asin", _np(np.arcsin), v(mpmath.asin), lambda B, a, o: (1.0 / B.sqrt(1.0 - a[0] * a[0]),),
           domain="−1 ≤ x ≤ 1", valid=lambda x: np.abs(x) <= 1),
        Fn("acos", 1, "acos", _np(np.arccos), v(mpmath.acos), lambda B, a, o: (-1.0 / B.sqrt(1.0 - a[0] * a[0]),),
           domain="−1 ≤ x ≤ 1", valid=lambda x: np.abs(x) <= 1),
        Fn("atan", 1, "atan", _np(np.arctan), v(mpmath.atan), lambda B, a, o: (1.0 / (1.0 + a[0] * a[0]),)),
        Fn("atan2", 2, "atan2", _np(np.arctan2), v(mpmath.atan2, 2),
           lambda B, a, o: (a[1] / (a[0] * a[0] + a[1] * a[1]), -a[0] / (a[0] * a[0] + a[1] * a[1]))),
        Fn("sinh", 1, "sinh", _np(np.sinh), v(mpmath.sinh), lambda B, a, o: (B.cosh(a[0]),)),
        Fn("cosh", 1, "cosh", _np(np.cosh), v(mpmath.cosh), lambda B, a, o: (B.sinh(a[0]),)),
        Fn("tanh", 1, "tanh", _np(np.tanh), v(mpmath.tanh), lambda B, a, o: (1.0 - o * o,)),
        Fn("asinh", 1, "asinh", _np(np.arcsinh), v(mpmath.asinh), lambda B, a, o: (1.0 / B.sqrt(a[0] * a[0] + 1.0),)),
        Fn("acosh", 1, "acosh", _np(np.arccosh), v(mpmath.acosh), lambda B, a, o: (1.0 / B.sqrt(a[0] * a[0] - 1.0),),
           domain="x ≥ 1", valid=lambda x: x >= 1),
        Fn("atanh", 1, "atanh", _np(np.arctanh), v(mpmath.atanh), lambda B, a, o: (1.0 / (1.0 - a[0] * a[0]),),
           domain="−1 < x < 1", valid=lambda x: np.abs(x) < 1),
        Fn("hypot", 2, "hypot", _np(np.hypot), v(mpmath.hypot, 2), lambda B, a, o: (a[0] / o, a[1] / o)),
        Fn("square", 1, "the square", _np(np.square), lambda a: a * a, lambda B, a, o: (2.0 * a[0],)),
        Fn("reciprocal", 1, "the reciprocal", _np(lambda x: 1.0 / x), v(lambda x: 1 / x), lambda B, a, o: (-o * o,)),
        Fn("erf", 1, "erf", _np(lambda x: np.vectorize(_math_erf, otypes=[float])(x)), v(mpmath.erf),
           lambda B, a, o: (two_over_sqrt_pi * B.exp(-a[0] * a[0]),)),
        Fn("erfc", 1, "erfc", _np(lambda x: np.vectorize(_math_erfc, otypes=[float])(x)), v(mpmath.erfc),
           lambda B, a, o: (-two_over_sqrt_pi * B.exp(-a[0] * a[0]),)),
        Fn("logaddexp", 2, "logaddexp", _np(np.logaddexp), v(_logaddexp, 2),
           lambda B, a, o: (B.exp(a[0] - o), B.exp(a[1] - o))),
        Fn("copysign", 2, "copysign", _np(np.copysign), v(_mp_copysign, 2),
           lambda B, a, o: (B.sign(a[0]) * B.sign(o), 0.0), rounds=False),
        Fn("floor", 1, "floor", _np(np.floor), v(mpmath.floor), lambda B, a, o: (0.0,), rounds=False),
        Fn("ceil", 1, "ceil", _np(np.ceil), v(mpmath.ceil), lambda B, a, o: (0.0,), rounds=False),
        Fn("min", 2, "min", _np(np.minimum), v(min, 2), lambda B, a, o: _sel(B, a[0] <= a[1]), rounds=False),
        Fn("max", 2, "max", _np(np.maximum), v(max, 2), lambda B, a, o: _sel(B, a[0] >= a[1]), rounds=False),
    ]
    return {f.id: f for f in table}


def _math_erf(x: float) -> float:
    import math

    return math.erf(x)


def _math_erfc(x: float) -> float:
    import math

    return math.erfc(x)


FUNCTIONS: dict[str, Fn] = _fns()
