"""The general search, for losses no named rule covers.

1. sympy transformations of the target (together, cancel, factor, radsimp, trigsimp), each followed by
   sympy's c99 rewrites (expm1, log1p…), under a time budget;
2. where no closed form removes the loss: the Taylor series of the target in one variable about 0, used
   where the argument is small. The number of terms and the switch point are chosen by measurement: the
   series is used up to the largest argument where its truncation error stays below u/4, and the original
   formula beyond it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, Iterator

import mpmath
import numpy as np
import sympy as sp
from sympy.codegen import rewriting as sr
from sympy.polys.polyerrors import BasePolynomialError
from sympy.polys.ring_series import rs_series

from condhint.budget import OverBudget
from condhint.expr import CONST, INPUT, Node, topological
from condhint.messages import num
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import BudgetExceeded, Deadline, forward
from condhint.numeric.formats import Format
from condhint.numeric.reference import reference_values
from condhint.once import once_with_budget
from condhint.rewrites import dag, laurent, sym
from condhint.rewrites.context import Context
from condhint.rewrites.verify import MIN_GAIN

TRANSFORMS = ("together", "cancel", "factor", "radsimp", "trigsimp")  # sympy functions, in the order tried
SYMPY_TITLE = "Rewrite as `{text}` (sympy {name})"  # {text}: the replacement, filled in once it is written
MAX_TERMS = 12
SERIES_VAR = "__series_arg"


@dataclass
class Found:
    rule: str
    title: str
    replacement: Node
    approximate: bool = False
    note: str = ""  # left as a comment with the fix


def _transform(name: str, expr: Any) -> Any:
    return getattr(sp, name)(expr)


def _c99(expr: Any) -> Any:
    return sr.optimize(expr, sr.optims_c99)


def transformed(target: Node, ctx: Context, deadline: Deadline) -> Iterator[Found]:
    """Candidates from sympy's general transformations of the target."""
    try:
        tr = ctx.translate(target)
    except ValueError:
        return
    seen = {tr.expr}
    transforms = set()  # transforms often agree; the c99 rewrites (most of the time here) run once for each
    for name in TRANSFORMS:
        if _late(deadline):
            return
        try:
            out = once_with_budget(_transform, (name, tr.expr), min(ctx.sympy_seconds, _left(deadline)))
            if out in transforms:
                continue
            transforms.add(out)
            out = once_with_budget(_c99, (out,), min(ctx.sympy_seconds, _left(deadline)))
        except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, AttributeError):
            continue
        if out in seen:
            continue
        seen.add(out)
        try:
            yield Found(f"sympy-{name}", SYMPY_TITLE.replace("{name}", name), sym.from_sympy(out, tr))
        except sym.Untranslatable:
            continue


# ---- series branch -----------------------------------------------------------------------------------------------
def series_variable(target: Node) -> Node | None:
    """The largest sub-expression u with target = g(u): every input is reached only through u."""
    names = dag.inputs(target)
    inner = [n for n in topological(target) if n is not target and n.kind != CONST and dag.inputs(n) == names]
    for u in sorted(inner, key=dag.size, reverse=True):
        hole = Node(INPUT, name=SERIES_VAR, text=SERIES_VAR)
        if dag.inputs(dag.substitute(target, u, hole, by_key=True)) == {SERIES_VAR}:
            return u
    return None


def _series_terms(expr: Any, u: sp.Symbol, count: int) -> list[tuple[Fraction, int]] | None:
    """The first `count` (or fewer, if the series ends) non-zero terms c·u^k of the Maclaurin series, or None."""
    order = count + 2
    for _ in range(6):
        s = _maclaurin(expr, u, order)
        poly = sp.Poly(s, u) if s is not None and s.is_polynomial(u) else None
        if poly is None:
            return None
        terms = [(c, k[0]) for k, c in zip(poly.monoms(), poly.coeffs())]
        if any(not c.is_Rational for c, _ in terms):
            return None
        terms = sorted(((Fraction(int(c.p), int(c.q)), k) for c, k in terms), key=lambda t: t[1])
        if len(terms) >= count or s == expr:
            return terms[:count]
        order *= 2
    return None


def _maclaurin(expr: Any, u: sp.Symbol, order: int) -> Any:
    """The Maclaurin polynomial of `expr` below u**order (None: none with rational coefficients): by truncated
    Laurent series (`laurent`, milliseconds, where poles at 0 cancel), else, for functions that lacks, sympy's
    ring series (0.1 s where `series` takes seconds, e.g. a polynomial in c and log(1 + c) whose terms cancel
    up to c**7), else sympy's `series`."""
    try:
        return laurent.maclaurin(expr, u, order)
    except laurent.Unsupported:
        pass
    except laurent.NoSeries:
        return None  # sympy's series takes seconds to find the same (and more where irrational constants cancel)
    try:
        s = rs_series(expr, u, order).as_expr()
        if s.is_polynomial(u):
            return s
    except (ValueError, TypeError, KeyError, AttributeError, NotImplementedError, BasePolynomialError):
        pass
    return sp.series(expr, u, 0, order).removeO()


def series_node(terms: list[tuple[Fraction, int]], u: Node) -> Node:
    """c₀·u^k₀ + c₁·u^k₁ + … written as `u**3 / 6 - u**5 / 120 + …` (leading term first)."""
    def term(c: Fraction, k: int) -> Node:
        a = abs(c)
        if k == 0:
            return dag.const(a)
        base = u if k == 1 else dag.power(u, k)
        num = base if a.numerator == 1 else dag.mul(dag.const(a.numerator), base)
        return num if a.denominator == 1 else dag.div(num, dag.const(a.denominator))

    c0, k0 = terms[0]
    acc = term(c0, k0) if c0 > 0 else dag.neg(term(c0, k0))
    for c, k in terms[1:]:
        acc = dag.add(acc, term(c, k)) if c > 0 else dag.sub(acc, term(c, k))
    return acc


def _nice_below(x: float) -> float:
    """A round number ≤ x (one significant digit)."""
    if x <= 0 or not math.isfinite(x):
        return x
    e = math.floor(math.log10(x))
    return float(f"{math.floor(x / 10.0 ** e)}e{e}")  # 0.3, not 3 * 0.1 = 0.30000000000000004


def series(target: Node, ctx: Context, deadline: Deadline) -> Iterator[Found]:
    """A Taylor branch for small arguments, switch point and length chosen by measurement."""
    u = series_variable(target)
    if u is None:
        return
    uv = ctx.bench.values(u)
    uv = np.abs(uv[np.isfinite(uv) & (uv != 0)])
    if not len(uv):
        return
    lo, hi = float(uv.min()), float(uv.max())
    x = Node(INPUT, name=SERIES_VAR, text=SERIES_VAR)
    local = dag.substitute(target, u, x, by_key=True)
    try:
        tr = sym.to_sympy(local, set(), lambda n: n is x and ctx.sign(u) == 1, exact_forms=True)
    except ValueError:
        return
    (var,) = [s for s, n in tr.symbols.items() if n is x] or [None]
    if var is None or tr.expr.free_symbols != {var}:
        return
    grid_u = np.unique(np.concatenate([np.geomspace(lo, hi, 48) if hi > lo else np.array([lo]), [lo, hi]]))
    signs = [1.0] if ctx.sign(u) == 1 else [1.0, -1.0] if ctx.sign(u) == 0 else [-1.0]
    grid = np.concatenate([s * grid_u for s in signs])
    try:
        exact = _exact(local, grid, deadline)
        orig = _lost(forward(topological(local), {SERIES_VAR: grid}, F64_BACKEND, len(grid))[id(local)], exact,
                     ctx.bench.format)
    except BudgetExceeded:
        return
    if not np.max(orig, initial=0.0) >= MIN_GAIN:
        return  # exact to within a digit already: no series can make the site MIN_GAIN digits better
    try:
        every = once_with_budget(_series_terms, (tr.expr, var, MAX_TERMS), min(1.0, _left(deadline)))
    except (OverBudget, RuntimeError, ValueError, TypeError, sp.PoleError, NotImplementedError):
        return
    if not every:
        return
    best: tuple[float, int, float] | None = None  # (worst digits, terms, switch)
    chosen: list[tuple[Fraction, int]] | None = None
    for count in range(1, len(every) + 1):
        if _late(deadline):
            break
        terms = every[:count]
        trunc = _truncation(terms, grid, exact)
        ok = trunc <= ctx.bench.u / 4
        # switch: the largest |u| below which every grid point is within the truncation bound
        bad = np.abs(grid)[~ok]
        switch = float(bad.min()) if len(bad) else math.inf
        # the switch as it will be written: a round number checked in mpmath (the grid is coarse)
        cut = switch if switch > hi else _checked_cut(local, terms, switch, signs, ctx.bench.u / 4, deadline)
        if cut is None or cut <= lo:
            continue
        poly = series_node(terms, x)
        with np.errstate(all="ignore"):
            p64 = forward(topological(poly), {SERIES_VAR: grid}, F64_BACKEND, len(grid))[id(poly)]
        plost = _lost(p64, exact, ctx.bench.format)
        use = np.abs(grid) < cut
        # what the original still loses beyond the switch: at the grid points there, and at the switch itself
        try:
            beyond = max(np.max(orig[~use], initial=0.0),
                         _original_loss(local, cut, signs, ctx, deadline) if cut <= hi else 0.0)
        except BudgetExceeded:
            break
        worst = float(max(np.max(plost[use], initial=0.0), beyond))
        if best is None or worst < best[0] - 0.25:
            best, chosen = (worst, count, cut), terms
        if not len(bad):
            break
    if best is None or chosen is None:
        return
    worst, count, cut = best
    poly = series_node(chosen, u)
    if cut > hi:
        name = _short(u)
        yield Found("series", f"Use the Taylor series ({count} terms) on this small-argument range", poly, True,
                    f"Taylor series: accurate for |{name}| <= {num(hi, 2)} (checked); not beyond")
        return
    cond = dag.compare(dag.call("abs", u), "<", dag.const(cut))
    yield Found("series", f"Use the Taylor series ({count} terms) where |{_short(u)}| < {cut:g}",
                dag.select(cond, poly, target), True)


def _short(u: Node) -> str:
    text = u.text or u.name or "x"
    return text if len(text) <= 20 else "x"


def _exact(root: Node, grid: np.ndarray, deadline: Deadline) -> list[Any]:
    vals, dps = reference_values(topological(root), {SERIES_VAR: grid}, len(grid), deadline)
    with mpmath.workdps(dps):
        return [+v for v in vals[id(root)]]


def _checked_cut(local: Node, terms: list[tuple[Fraction, int]], switch: float, signs: list[float], bound: float,
                 deadline: Deadline) -> float | None:
    """The round number below `switch` (the first sampled |u| past the truncation bound) at which the series is
    checked to be within `bound` itself: the grid is coarse, and an argument between its last good point and
    the round number must not go unchecked (the truncation error grows with |u|)."""
    cut = _nice_below(switch)
    for _ in range(6):
        if cut <= 0:
            return None
        pts = np.array([s * cut for s in signs])
        try:
            exact = _exact(local, pts, deadline)
        except BudgetExceeded:
            return None
        if np.all(_truncation(terms, pts, exact) <= bound):
            return cut
        cut = _nice_below(cut * 0.999)  # the next round number down: 0.1 → 0.09
    return None


def _original_loss(local: Node, at: float, signs: list[float], ctx: Context, deadline: Deadline) -> float:
    """The worst digits the original formula loses at ±`at` (just past the switch, where it takes over)."""
    pts = np.array([s * at for s in signs])
    with np.errstate(all="ignore"):
        v64 = forward(topological(local), {SERIES_VAR: pts}, F64_BACKEND, len(pts))[id(local)]
    return float(np.max(_lost(v64, _exact(local, pts, deadline), ctx.bench.format)))


def _truncation(terms: list[tuple[Fraction, int]], grid: np.ndarray, exact: list[Any]) -> np.ndarray:
    out = np.empty(len(grid))
    with mpmath.workdps(60):
        for i, (g, e) in enumerate(zip(grid, exact)):
            xg = mpmath.mpf(float(g))
            p = mpmath.fsum(mpmath.mpf(c.numerator) / c.denominator * xg ** k for c, k in terms)
            out[i] = math.inf if (mpmath.isnan(e) or e == 0) else float(abs((p - e) / e))
    return out


def _lost(values: Any, exact: list[Any], fmt: Format) -> np.ndarray:
    """Digits lost by each value against the exact one, counted in `fmt`."""
    v = np.asarray(values, dtype=float)
    out = np.empty(len(v))
    u, total = fmt.unit_roundoff, fmt.digits
    with mpmath.workdps(60):
        for i, (a, e) in enumerate(zip(v, exact)):
            if mpmath.isnan(e) or e == 0:
                out[i] = 0.0
            elif not math.isfinite(a):
                out[i] = total
            else:
                err = float(abs((mpmath.mpf(a) - e) / e))
                out[i] = min(total, max(0.0, math.log10(max(err, u) / u)))
    return out


def _left(deadline: Deadline) -> float:
    import time

    return max(0.05, (deadline.at - time.perf_counter()) if deadline.at is not None else 1.0)


def _late(deadline: Deadline) -> bool:
    import time

    return deadline.at is not None and time.perf_counter() > deadline.at
