"""Reductions as operation records: sum, mean, var, std, dot, norm, min, max, prod, cumsum, math.fsum.

A reduction takes an array (samples × elements: one row per sample) and gives one number per row (cumsum: a
row). Its binary64 evaluation is the library's own code applied row by row or along the last axis of a
C-contiguous matrix (which numpy reduces row by row with the same pairwise summation as a 1-D array: checked
in tests/engine/test_reductions.py), its reference is exact at mpmath's working precision (`mpmath.fsum`). The
adjoint of a reduction is a vector-Jacobian product (`vjp`), written against numpy and mpmath object arrays.

The summation order (`summation`) says how its rounding errors grow with the length n (Higham 2002, chapter on
summation): numpy's pairwise summation (`pairwise_depth`), sequential (`n − 1` roundings), or exact.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

import mpmath
import numpy as np

from condhint.numeric.operation import EXACT, Array, Operation, Rounding, Signature, Spellings

Vjp = Callable[[Any, list[Array], Array, Array], tuple[Array, ...]]  # (B, args, out, adjoint) -> arg adjoints

ONE, TWO = Signature(1, 1, reduces=True), Signature(2, 2, reduces=True)
_BLOCK, _UNROLL = 128, 8  # numpy's pairwise summation: blocks of 128 summed in 8 interleaved partial sums


def pairwise_depth(n: int) -> int:
    """The most roundings one term goes through in numpy's pairwise summation of n contiguous numbers
    (numpy's `pairwise_sum`: sequential below 8 terms, 8 partial sums within a block of ≤ 128, halves above)."""
    if n <= 1:
        return 0
    if n < _UNROLL:
        return n - 1
    if n <= _BLOCK:
        return (n // _UNROLL - 1) + 3 + n % _UNROLL
    half = n // 2
    half -= half % _UNROLL
    return 1 + max(pairwise_depth(half), pairwise_depth(n - half))


def depth(summation: str, n: int) -> int:
    """Roundings per term of a reduction of n terms in the given order (its error ≲ depth · u · Σ|terms|)."""
    if summation == "pairwise":
        return pairwise_depth(n)
    if summation == "sequential":
        return max(n - 1, 0)
    return 1 if summation == "exact" else 0  # math.fsum rounds once; min/max do not round


@dataclass(frozen=True)
class Reduction(Operation):
    summation: str = "pairwise"  # "pairwise" (numpy), "sequential" (cumsum, dot), "exact" (fsum), "none"
    vjp: Vjp | None = None
    array_result: bool = False  # cumsum: one value per element
    takes_ddof: bool = False  # var, std


def _rows(fn: Callable[[Any], Any]) -> Callable[[Array], Array]:
    """A function of one row applied to every row of a matrix, keeping a column."""
    def call(a: Array) -> Array:
        out = np.empty((a.shape[0], 1), dtype=a.dtype)
        for i in range(a.shape[0]):
            out[i, 0] = fn(a[i])
        return out
    return call


def _rows2(fn: Callable[[Any, Any], Any]) -> Callable[[Array, Array], Array]:
    def call(a: Array, b: Array) -> Array:
        a, b = np.broadcast_arrays(a, b)
        out = np.empty((a.shape[0], 1), dtype=a.dtype)
        for i in range(a.shape[0]):
            out[i, 0] = fn(a[i], b[i])
        return out
    return call


def _quiet(fn: Callable[..., Array]) -> Callable[..., Array]:
    def call(*args: Array) -> Array:
        with np.errstate(all="ignore"):
            return fn(*args)
    return call


def _mp_var(row: Any, ddof: int) -> Any:
    n = len(row)
    if n - ddof <= 0:
        return mpmath.mpf("nan")
    m = mpmath.fsum(row) / n
    return mpmath.fsum((v - m) ** 2 for v in row) / (n - ddof)


def _mp_cumsum(a: Array) -> Array:
    out = np.empty(a.shape, dtype=object)
    for i in range(a.shape[0]):
        acc = mpmath.mpf(0)
        for j in range(a.shape[1]):
            acc = acc + a[i, j]  # exact enough: the working precision is chosen for the whole site
            out[i, j] = acc
    return out


def _width(a: Array) -> int:
    return a.shape[-1]


def _vjp_sum(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    return (g * np.ones_like(a[0], dtype=float if a[0].dtype != object else object),)


def _vjp_mean(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    return (g * np.ones_like(a[0], dtype=float) / _width(a[0]),)


def _vjp_prod(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    with np.errstate(all="ignore"):
        return (g * np.where(a[0] != 0, out / np.where(a[0] != 0, a[0], 1.0), 0.0),)


def _vjp_dot(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    x, y = np.broadcast_arrays(a[0], a[1])
    return (g * y, g * x)


def _vjp_norm(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    with np.errstate(all="ignore"):
        return (g * a[0] / out,)


def _vjp_extreme(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    hit = a[0] == out
    first = hit & (np.cumsum(hit, axis=-1) == 1)  # numpy returns the first of equal extremes
    return (g * first,)


def _vjp_cumsum(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    return (np.cumsum(g[..., ::-1], axis=-1)[..., ::-1],)


def _var_vjp(ddof: int, root: bool) -> Vjp:
    def vjp(B: Any, a: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
        x = a[0]
        n = _width(x)
        with np.errstate(all="ignore"):
            d = 2.0 * (x - x.mean(axis=-1, keepdims=True)) / max(n - ddof, 1)
            return (g * (d / (2.0 * out) if root else d),)
    return vjp


SUM_SOURCE = Rounding(0.5, "each addition correctly rounded (IEEE 754-2019); the order is the summation's")


def _record_list() -> list[Reduction]:
    q = _quiet
    return [
        Reduction("sum", "the sum", ONE, q(lambda a: np.sum(a, axis=-1, keepdims=True)), _rows(mpmath.fsum),
                  lambda *_: (), SUM_SOURCE, spellings=Spellings(numpy=("sum",), methods=("sum",)),
                  vjp=_vjp_sum, generated={"numpy": "sum"}),
        # Python's sum: one addition after another from 0 (Python < 3.12; 3.12 compensates sums of floats: the
        # binary64 value is Python's own `sum` of the row, so it follows the running interpreter).
        Reduction("pysum", "the sum", ONE, q(_rows(lambda r: sum(r.tolist()))), _rows(mpmath.fsum), lambda *_: (),
                  SUM_SOURCE, spellings=Spellings(builtins=("sum",)), summation="sequential", vjp=_vjp_sum),
        Reduction("fsum", "math.fsum", ONE, q(_rows(math.fsum)), _rows(mpmath.fsum), lambda *_: (),
                  SUM_SOURCE, spellings=Spellings(math=("fsum",)), summation="exact", vjp=_vjp_sum),
        Reduction("mean", "the mean", ONE, q(lambda a: np.mean(a, axis=-1, keepdims=True)),
                  _rows(lambda r: mpmath.fsum(r) / len(r)), lambda *_: (), SUM_SOURCE,
                  spellings=Spellings(numpy=("mean", "average"), methods=("mean",)), vjp=_vjp_mean,
                  generated={"numpy": "mean"}),
        Reduction("var", "the variance", ONE, q(lambda a: a), _rows(lambda r: _mp_var(r, 0)), lambda *_: (),
                  SUM_SOURCE, spellings=Spellings(numpy=("var",), methods=("var",)), vjp=_var_vjp(0, False),
                  takes_ddof=True, generated={"numpy": "var"}),
        Reduction("std", "the standard deviation", ONE, q(lambda a: a), _rows(lambda r: mpmath.sqrt(_mp_var(r, 0))),
                  lambda *_: (), SUM_SOURCE, spellings=Spellings(numpy=("std",), methods=("std",)),
                  vjp=_var_vjp(0, True), takes_ddof=True, generated={"numpy": "std"}),
        Reduction("prod", "the product", ONE, q(lambda a: np.prod(a, axis=-1, keepdims=True)),
                  _rows(mpmath.fprod), lambda *_: (), SUM_SOURCE,
                  spellings=Spellings(numpy=("prod",), methods=("prod",)), summation="sequential", vjp=_vjp_prod),
        Reduction("dot", "the dot product", TWO, q(_rows2(np.dot)), _rows2(lambda a, b: mpmath.fdot(zip(a, b))),
                  lambda *_: (), SUM_SOURCE, spellings=Spellings(numpy=("vdot", "dot", "inner"), methods=("dot",)),
                  summation="sequential", vjp=_vjp_dot),
        Reduction("norm", "the 2-norm", ONE, q(_rows(np.linalg.norm)),
                  _rows(lambda r: mpmath.sqrt(mpmath.fsum(v * v for v in r))), lambda *_: (), SUM_SOURCE,
                  spellings=Spellings(numpy=("linalg.norm",)), summation="sequential", vjp=_vjp_norm),
        Reduction("amax", "the maximum", ONE, q(lambda a: np.max(a, axis=-1, keepdims=True)), _rows(max),
                  lambda *_: (), EXACT, spellings=Spellings(numpy=("max", "amax"), methods=("max",)),
                  summation="none", vjp=_vjp_extreme, generated={"numpy": "max"}),
        Reduction("amin", "the minimum", ONE, q(lambda a: np.min(a, axis=-1, keepdims=True)), _rows(min),
                  lambda *_: (), EXACT, spellings=Spellings(numpy=("min", "amin"), methods=("min",)),
                  summation="none", vjp=_vjp_extreme),
        # What a verified fix writes for a 2-norm that must not overflow: `math.hypot(*x)` (Python ≥ 3.8 scales,
        # ≥ 3.10 rounds within about 1 ulp: Python's documentation); not read from code (`*x` stays opaque).
        Reduction("hypot_all", "math.hypot of the elements", ONE, q(_rows(lambda r: math.hypot(*r))),
                  _rows(lambda r: mpmath.sqrt(mpmath.fsum(v * v for v in r))), lambda *_: (), SUM_SOURCE,
                  summation="exact", vjp=_vjp_norm, written=False),
        Reduction("cumsum", "the cumulative sum", ONE, q(lambda a: np.cumsum(a, axis=-1)), _mp_cumsum,
                  lambda *_: (), SUM_SOURCE, spellings=Spellings(numpy=("cumsum",), methods=("cumsum",)),
                  summation="sequential", vjp=_vjp_cumsum, array_result=True),
    ]


REDUCTIONS: dict[str, Reduction] = {r.id: r for r in _record_list()}


def evaluate_f64(r: Reduction, ddof: int, *args: Array) -> Array:
    """binary64 value of a reduction as the code computes it (numpy's own routine), one per row."""
    if r.takes_ddof:
        fn = np.var if r.id == "var" else np.std
        with np.errstate(all="ignore"):
            return fn(args[0], axis=-1, keepdims=True, ddof=ddof)
    return r.ufunc(*args)


def evaluate_mp(r: Reduction, ddof: int, *args: Array) -> Array:
    """The exact value (at mpmath's working precision), one per row."""
    if r.takes_ddof:
        def var(row: Any) -> Any:
            return _mp_var(row, ddof)
        return _rows(var if r.id == "var" else (lambda row: mpmath.sqrt(var(row))))(args[0])
    return r.mp(*args)


def vjp(r: Reduction, ddof: int, args: list[Array], out: Array, g: Array) -> tuple[Array, ...]:
    fn = _var_vjp(ddof, r.id == "std") if r.takes_ddof else r.vjp
    assert fn is not None
    return fn(None, args, out, g)


def method_spellings() -> dict[str, str]:
    """Array method name -> reduction id (`x.sum()`)."""
    return {m: r.id for r in REDUCTIONS.values() for m in r.spellings.methods}


def module_spellings(module: str) -> dict[str, str]:
    """Function name within `module` ("numpy", "math") -> reduction id."""
    return {name: r.id for r in REDUCTIONS.values() for name in r.spellings.by_module().get(module, ())}
