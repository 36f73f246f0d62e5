"""The record of one operation: everything condhint knows about it, read by every layer.

The registry of records is `operations.OPERATIONS`; the reader's spellings (`reading.names`), the sympy forms
(`symbolic`, `rewrites.sym`) and the generated-code spellings (`rewrites.codegen`) are views derived from it.
"""
from __future__ import annotations

import importlib
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from condhint.numeric.formats import Format

Array = np.ndarray
Partials = Callable[[Any, Sequence[Array], Array], tuple[Any, ...]]
SympyForm = Callable[[Any], Callable[..., Any]]  # receives the sympy module, gives a builder of the form


@dataclass(frozen=True)
class Signature:
    """How many arguments a call takes: a fixed count, or a range (variadic functions, reductions)."""

    min_args: int
    max_args: int | None  # None: no upper limit
    reduces: bool = False  # takes an array and reduces it (sum, prod, …): no such record yet
    folds: bool = False  # a call with more arguments is folded pairwise from the left (`max(a, b, c)`)

    @property
    def fixed(self) -> int | None:
        """The one argument count of a fixed-arity scalar operation, else None."""
        return self.min_args if self.max_args == self.min_args and not self.reduces else None


UNARY, BINARY = Signature(1, 1), Signature(2, 2)
FOLDED = Signature(2, 2, folds=True)  # binary, and variadic calls fold into it


@dataclass(frozen=True)
class Rounding:
    """The error of one evaluation in a format, in ulps of the result: 0 exact, 0.5 correctly rounded."""

    ulps: float
    source: str  # where the bound comes from

    @property
    def rounds(self) -> bool:
        return self.ulps > 0


EXACT = Rounding(0.0, "exact: the result is representable (IEEE 754-2019)")
CORRECT = Rounding(0.5, "correctly rounded (IEEE 754-2019 requires it)")
# Library functions (libm, numpy's own loops) are not required to round correctly; their documented maximum
# errors on common platforms (glibc manual, "Known Maximum Errors in Math Functions"; numpy's SIMD loops) stay
# within a few ulps. The analysis models every rounding as u; this bound is what the tests hold them to.
LIBRARY = Rounding(4.0, "library function: at most 4 ulps (glibc manual's error tables; numpy SIMD loops)")


@dataclass(frozen=True)
class Spellings:
    """The names a call of the operation is written with, per module (the first name is the preferred one)."""

    math: tuple[str, ...] = ()
    cmath: tuple[str, ...] = ()  # cmath returns complex numbers, which the real model does not describe: empty
    numpy: tuple[str, ...] = ()
    scipy_special: tuple[str, ...] = ()
    builtins: tuple[str, ...] = ()
    methods: tuple[str, ...] = ()  # array methods (`x.sum()`): none yet, reductions will use it

    def by_module(self) -> dict[str, tuple[str, ...]]:
        return {"math": self.math, "cmath": self.cmath, "numpy": self.numpy, "scipy.special": self.scipy_special,
                "builtins": self.builtins}


@dataclass(frozen=True)
class Operation:
    id: str  # the node kind in expression DAGs
    label: str  # how messages name the operation
    signature: Signature
    ufunc: Callable[..., Array]  # numpy evaluation; the result has the arguments' floating dtype
    mp: Callable[..., Array]  # mpmath evaluation on object arrays (complex results and exceptions give nan)
    partials: Partials  # ∂op/∂argᵢ written against the backend interface (`backends`): (B, args, out) -> tuple
    rounding: Rounding = LIBRARY
    domain: str | None = None  # human description of the real domain, for domain findings
    valid: Callable[..., Array] | None = None  # mask of arguments inside the domain
    sympy: SympyForm | None = None  # the exact real function in sympy
    sympy_named: SympyForm | None = None  # the sympy function class naming it in rewrites (`expm1`), if any
    spellings: Spellings = Spellings()
    generated: Mapping[str, str] = field(default_factory=dict)  # spelling in generated code per module
    keeps_integers: bool = False  # integer arguments give an integer result (exact: never reported)
    written: bool = True  # False: the reader infers it (conversions), no call spells it

    @property
    def arity(self) -> int | None:
        return self.signature.fixed

    @property
    def rounds(self) -> bool:
        return self.rounding.rounds

    @property
    def f64(self) -> Callable[..., Array]:
        """Evaluation in binary64 (numpy's default dtype: no conversion needed)."""
        return self.ufunc

    def evaluate(self, fmt: Format, *args: Any) -> Array:
        """The operation applied to arrays of `fmt`'s dtype, rounded to `fmt` as numpy does."""
        dtype = fmt.dtype
        out = self.ufunc(*(np.asarray(a, dtype=dtype) for a in args))
        return np.asarray(out).astype(dtype, copy=False)

    def sympy_form(self, sp: Any, named: bool = False) -> Callable[..., Any]:
        """A builder of the sympy expression (`named`: the rewrites' function class where there is one)."""
        form = self.sympy_named if named and self.sympy_named is not None else self.sympy
        if form is None:
            raise ValueError(f"no symbolic form for {self.id}")
        return form(sp)


def quiet(fn: Callable[..., Array]) -> Callable[..., Array]:
    """A numpy function evaluated without floating-point warnings (overflow gives inf, invalid nan)."""
    def call(*args: Array) -> Array:
        with np.errstate(all="ignore"):
            return fn(*args)

    return call


def sympy_attr(name: str) -> SympyForm:
    """A sympy function by its name in the sympy namespace (`sympy_attr("sin")` -> sp.sin)."""
    return lambda sp: getattr(sp, name)


def codegen_class(module: str, name: str) -> SympyForm:
    """A class of `sympy.codegen` (`cfunctions.expm1`, `numpy_nodes.logaddexp`), imported when first used."""
    return lambda sp: getattr(importlib.import_module(f"sympy.codegen.{module}"), name)


def same_name(name: str, *, numpy: str | None = None) -> dict[str, str]:
    """Generated-code spellings: `name` in math, `numpy` (default: the same name) in numpy."""
    return {"math": name, "numpy": numpy or name}
