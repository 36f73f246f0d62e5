"""Two vectorised evaluation backends with one interface.

`F64` evaluates in IEEE binary64 with numpy, in the same operation order as the Python code.
`MP` evaluates on numpy object arrays of mpmath numbers at a chosen precision: the reference.
Partial derivatives in `functions` are written once against this interface and run on both.
"""
from __future__ import annotations

import math
from typing import Any, Callable

import mpmath
import numpy as np

Array = np.ndarray


class F64:
    """binary64 arithmetic on float arrays."""

    name = "f64"
    sqrt = staticmethod(np.sqrt)
    exp = staticmethod(np.exp)
    log = staticmethod(np.log)
    sin = staticmethod(np.sin)
    cos = staticmethod(np.cos)
    sinh = staticmethod(np.sinh)
    cosh = staticmethod(np.cosh)
    abs = staticmethod(np.abs)
    floor = staticmethod(np.floor)
    pi = math.pi
    ln2 = math.log(2.0)
    ln10 = math.log(10.0)

    @staticmethod
    def sign(a: Array) -> Array:
        return np.sign(a)

    @staticmethod
    def where(cond: Array, a: Any, b: Any) -> Array:
        return np.where(np.asarray(cond, dtype=bool), a, b)

    @staticmethod
    def const(value: float, exact: str | None, n: int) -> Array:
        return np.full(n, value, dtype=float)

    @staticmethod
    def asarray(values: Array) -> Array:
        return np.asarray(values, dtype=float)

    @staticmethod
    def to_float(a: Array) -> Array:
        return np.asarray(a, dtype=float)


# Arguments beyond binary128's range (|x| > 2**16384) make mpmath's argument reduction or exponent arithmetic
# take unbounded time (sin of exp(7e8), exp(exp(exp(x)))): such a reference value is treated as undefined.
_HUGE_MAG = 16384


def _huge(a: Any) -> bool:
    return isinstance(a, mpmath.mpf) and mpmath.isfinite(a) and a != 0 and mpmath.mag(a) > _HUGE_MAG


# Functions whose value at |x| > 2**14 lies beyond binary128's range: their limit is exact enough, and mpmath's
# high-precision path for such arguments (powers of e with huge exponents) runs for minutes.
_SATURATING: dict[Any, Callable[[Any], Any]] = {
    mpmath.exp: lambda x: mpmath.inf if x > 0 else mpmath.mpf(0),
    mpmath.expm1: lambda x: mpmath.inf if x > 0 else mpmath.mpf(-1),
    mpmath.sinh: lambda x: mpmath.inf if x > 0 else -mpmath.inf,
    mpmath.cosh: lambda x: mpmath.inf,
}


def _real(fn: Callable[..., Any]) -> Callable[..., Any]:
    """An mpmath function that answers nan instead of a complex number or an exception."""
    saturate = _SATURATING.get(fn)

    def wrapped(*args: Any) -> Any:
        if any(_huge(a) for a in args):
            return mpmath.mpf("nan")
        if saturate is not None and isinstance(args[0], mpmath.mpf) and abs(args[0]) > 16384:
            return saturate(args[0])
        try:
            r = fn(*args)
        except (ValueError, ZeroDivisionError, OverflowError, TypeError):
            return mpmath.mpf("nan")
        if isinstance(r, mpmath.mpc):
            return r.real if r.imag == 0 else mpmath.mpf("nan")
        return r

    return wrapped


def _vec(fn: Callable[..., Any], nin: int = 1) -> Callable[..., Array]:
    u = np.frompyfunc(_real(fn), nin, 1)

    def call(*args: Any) -> Array:
        return np.asarray(u(*args), dtype=object)

    return call


def _mp_sign(a: Any) -> Any:
    return mpmath.mpf(mpmath.sign(a)) if not mpmath.isnan(a) else a


_SYMBOLIC = {"pi": lambda: +mpmath.pi, "e": lambda: +mpmath.e, "tau": lambda: 2 * mpmath.pi,
             "euler_gamma": lambda: +mpmath.euler, "inf": lambda: mpmath.inf, "nan": lambda: mpmath.nan}


def mp_constant(exact: str) -> Any:
    """The exact value a literal or named constant stands for, at the current precision."""
    if exact in _SYMBOLIC:
        return _SYMBOLIC[exact]()
    if exact.startswith("-") and exact[1:] in _SYMBOLIC:
        return -_SYMBOLIC[exact[1:]]()
    if "/" in exact:
        num, den = exact.split("/")
        return mpmath.mpf(num) / mpmath.mpf(den)
    return mpmath.mpf(exact)


class MP:
    """mpmath arithmetic on object arrays; set the precision with `mpmath.workdps` around its use."""

    name = "mp"
    sqrt = staticmethod(_vec(mpmath.sqrt))
    exp = staticmethod(_vec(mpmath.exp))
    log = staticmethod(_vec(mpmath.log))
    sin = staticmethod(_vec(mpmath.sin))
    cos = staticmethod(_vec(mpmath.cos))
    sinh = staticmethod(_vec(mpmath.sinh))
    cosh = staticmethod(_vec(mpmath.cosh))
    abs = staticmethod(_vec(abs))
    floor = staticmethod(_vec(mpmath.floor))
    sign = staticmethod(_vec(_mp_sign))

    @staticmethod
    def where(cond: Array, a: Any, b: Any) -> Array:
        out = np.where(np.asarray(cond, dtype=bool), a, b)
        return np.asarray(out, dtype=object)

    @staticmethod
    def const(value: float, exact: str | None, n: int) -> Array:
        v = mp_constant(exact) if exact is not None else mpmath.mpf(value)
        out = np.empty(n, dtype=object)
        out[:] = [v] * n
        return out

    @staticmethod
    def asarray(values: Array) -> Array:
        out = np.empty(len(values), dtype=object)
        out[:] = [mpmath.mpf(float(v)) for v in values]
        return out

    @staticmethod
    def to_float(a: Array) -> Array:
        return np.array([float(v) if mpmath.isfinite(v) else (math.nan if mpmath.isnan(v) else float(v))
                         for v in a], dtype=float)

    # pi, ln2 and ln10 depend on the working precision, so they are read when used.
    @property
    def pi(self) -> Any:
        return +mpmath.pi

    @property
    def ln2(self) -> Any:
        return +mpmath.ln2

    @property
    def ln10(self) -> Any:
        return +mpmath.ln10


MP_BACKEND = MP()
F64_BACKEND = F64()
