"""Maclaurin polynomials by arithmetic on truncated Laurent series with rational coefficients.

For formulas whose terms have poles at 0 that cancel, such as 1 − (x/2)/tan(x/2) or k/2 − log(x/k) with
k = log(1 + x): sympy's ring series (`rs_series`) refuses to divide by a series that vanishes at 0, and
`series` takes seconds there. Here every subexpression is x**v · p(x), with p a polynomial of sympy's ring
series whose constant term is not zero, known below x**n; sympy's `rs_*` functions do the arithmetic on p.
Only one variable and rational coefficients are handled; anything else raises `NoSeries`. That is final
(sympy's series would not give rational coefficients either, except where irrational constants cancel),
but for `Unsupported` functions.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import sympy as sp
from sympy.polys import ring_series as rs
from sympy.polys.domains import QQ
from sympy.polys.rings import ring


class NoSeries(Exception):
    """The expression has no Maclaurin polynomial with rational coefficients (a pole or branch point at 0, an
    irrational or inexact constant, another variable)."""


class Unsupported(NoSeries):
    """A function this module has no series for: sympy's `series` may have one."""


@dataclass(frozen=True)
class Term:
    """x**v · p(x), with p(0) ≠ 0 and p known below x**n."""

    p: Any
    v: int
    n: int

    @property
    def known_below(self) -> int:
        """The absolute power of x below which the value's series is known."""
        return self.n + self.v


# Functions analytic at 0 with f(0) = 0 or 1 and rational Taylor coefficients, by sympy's ring series.
_AT_ZERO: dict[type, Callable[[Any, Any, int], Any]] = {
    sp.exp: rs.rs_exp, sp.sin: rs.rs_sin, sp.cos: rs.rs_cos, sp.tan: rs.rs_tan, sp.sinh: rs.rs_sinh,
    sp.cosh: rs.rs_cosh, sp.tanh: rs.rs_tanh, sp.atan: rs.rs_atan, sp.asin: rs.rs_asin,
    sp.asinh: rs.rs_asinh, sp.atanh: rs.rs_atanh,
}


def maclaurin(expr: sp.Expr, u: sp.Symbol, order: int) -> sp.Expr:
    """The Maclaurin polynomial of `expr` in `u` below u**order (raises `NoSeries`)."""
    if expr.free_symbols - {u}:
        raise NoSeries("more than one variable")
    _, x = ring("x", QQ)
    for slack in (8, 24, 72):  # cancellation between poles and terms costs orders: work with more, then check
        try:
            t = _series(expr, u, x, order + slack)
        except _Cancelled:
            continue
        if t.v < 0:
            raise NoSeries("a pole at 0")
        if t.known_below >= order:
            return sp.Add(*[sp.Rational(c.numerator, c.denominator) * u ** (m[0] + t.v)
                            for m, c in t.p.terms() if m[0] + t.v < order])
    raise NoSeries("terms cancel beyond the order")


class _Cancelled(Exception):
    """All known terms cancelled: more orders are needed."""


def _normal(q: Any, v: int, n: int) -> Term:
    """x**v · q known below x**n (relative to x**v), with q's leading power taken into v."""
    if not q:
        raise _Cancelled
    d = min(m[0] for m in q.monoms())
    if d:
        q = q.ring({(m[0] - d,): c for m, c in q.terms()})
    if n - d <= 0:
        raise _Cancelled
    return Term(q, v + d, n - d)


def _series(e: sp.Expr, u: sp.Symbol, x: Any, n: int) -> Term:
    R = x.ring
    if e == u:
        return Term(R(1), 1, n)
    if e.is_Rational:
        if e == 0:
            raise _Cancelled
        return Term(R(QQ(int(e.p), int(e.q))), 0, n)
    if e.is_number:
        raise NoSeries("an irrational or inexact constant")  # π, √3, 0.1 as a Float
    if e.is_Add:
        parts = [_series(a, u, x, n) for a in e.args]
        v = min(t.v for t in parts)
        below = min(t.known_below for t in parts) - v
        q = sum((rs.rs_trunc(t.p * x ** (t.v - v), x, below) for t in parts), R(0))
        return _normal(q, v, below)
    if e.is_Mul:
        acc = _series(e.args[0], u, x, n)
        for a in e.args[1:]:
            t = _series(a, u, x, n)
            k = min(acc.n, t.n)
            acc = Term(rs.rs_mul(acc.p, t.p, x, k), acc.v + t.v, k)
        return acc
    if e.is_Pow:
        return _power(_series(e.base, u, x, n), e.exp, x)
    if isinstance(e, sp.log):
        t = _series(e.args[0], u, x, n)
        if t.v != 0 or t.p.coeff(1) != 1:
            raise NoSeries("log of a value that is not 1 at 0")  # log of a constant other than 1: irrational
        return _normal(rs.rs_log(t.p, x, t.n), 0, t.n)
    fn = _AT_ZERO.get(type(e))
    if fn is not None and len(e.args) == 1:
        t = _series(e.args[0], u, x, n)
        if t.v < 1:
            raise NoSeries(f"{type(e).__name__} of a value that is not 0 at 0")
        return _normal(fn(t.p * x ** t.v, x, t.known_below), 0, t.known_below)
    raise Unsupported(f"no series for {type(e).__name__}")


def _power(t: Term, k: sp.Expr, x: Any) -> Term:
    if not k.is_number:
        raise Unsupported("a power with a variable exponent")  # (1 + x)**x: sympy's series has it
    if k.is_Integer:
        return Term(rs.rs_pow(t.p, int(k), x, t.n), t.v * int(k), t.n)
    if not k.is_Rational or (t.v * k).is_Integer is False:
        raise NoSeries("a power with a branch point at 0")
    c0 = t.p.coeff(1)
    root = sp.Rational(c0.numerator, c0.denominator) ** k
    if not root.is_Rational:
        raise NoSeries("an irrational coefficient")
    one = t.p * x.ring(QQ(1) / c0)  # constant term 1
    p = rs.rs_pow(one, k, x, t.n) * x.ring(QQ(int(root.p), int(root.q)))
    return Term(p, int(t.v * k), t.n)
