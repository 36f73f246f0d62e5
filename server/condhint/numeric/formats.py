"""Number formats: one record per IEEE 754 binary format condhint knows, and a lookup by name.

A format is fixed by its precision p (significand bits, the implicit bit included) and its largest exponent
emax; every limit the analysis uses (unit roundoff, overflow and underflow thresholds, decimal digits) is
derived from those two numbers here and read from the record everywhere else.
To add a format: one `Format(...)` listed in `FORMATS`, and its check values in tests/engine/test_formats.py.
"""
from __future__ import annotations

import importlib
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Format:
    name: str  # the IEEE 754 name, as messages and JSON output show it ("binary64")
    aliases: tuple[str, ...]  # other names users write ("float64", "double")
    precision: int  # p: significand bits, the implicit leading bit included
    max_exponent: int  # emax: the exponent of the largest finite number
    numpy_dtype: str | None  # the numpy dtype name, or None when plain numpy has none
    external_dtype: str | None = None  # where a dtype lives outside numpy (not a dependency of condhint)
    # Derived from precision and max_exponent in __post_init__:
    unit_roundoff: float = field(init=False)  # u = 2**-p: the relative error bound of correct rounding
    smallest_normal: float = field(init=False)  # 2**(1 - emax)
    smallest_subnormal: float = field(init=False)  # 2**(2 - emax - p)
    largest: float = field(init=False)  # (2 - 2**(1 - p)) * 2**emax
    digits: float = field(init=False)  # -log10(u): decimal digits a correctly rounded result carries

    def __post_init__(self) -> None:
        p, emax = self.precision, self.max_exponent
        derived = {
            "unit_roundoff": math.ldexp(1.0, -p),
            "smallest_normal": math.ldexp(1.0, 1 - emax),
            "smallest_subnormal": math.ldexp(1.0, 2 - emax - p),
            "largest": math.ldexp(2.0 - math.ldexp(1.0, 1 - p), emax),
        }
        derived["digits"] = -math.log10(derived["unit_roundoff"])
        for name, value in derived.items():
            object.__setattr__(self, name, value)

    @property
    def names(self) -> tuple[str, ...]:
        return (self.name, *self.aliases)

    @property
    def dtype(self) -> np.dtype:
        """The numpy dtype that computes in this format (bfloat16's comes from ml_dtypes)."""
        if self.numpy_dtype is not None:
            return np.dtype(self.numpy_dtype)
        module, _, attr = (self.external_dtype or "").rpartition(".")
        return np.dtype(getattr(importlib.import_module(module), attr))

    @property
    def short(self) -> str:
        """The name code spells it with (`float32`), for messages."""
        return self.aliases[0] if self.aliases else self.name

    def narrower_than(self, other: "Format") -> bool:
        """Whether converting from `other` to this format can round or overflow."""
        return self.precision < other.precision or self.max_exponent < other.max_exponent

    def round(self, values: Any) -> np.ndarray:
        """binary64 values rounded to this format (as numpy converts them), given back as binary64."""
        with np.errstate(all="ignore"):
            return np.asarray(values, dtype=float).astype(self.dtype).astype(float)


BINARY64 = Format("binary64", ("float64", "double"), 53, 1023, "float64")
BINARY32 = Format("binary32", ("float32", "single"), 24, 127, "float32")
BINARY16 = Format("binary16", ("float16", "half"), 11, 15, "float16")
# bfloat16: binary32's exponent range with 8 significand bits. Plain numpy has no such dtype; the ml_dtypes
# package (kept by the JAX developers; numpy ufuncs work on its arrays) provides it.
BFLOAT16 = Format("bfloat16", ("bf16",), 8, 127, None, external_dtype="ml_dtypes.bfloat16")

FORMATS: dict[str, Format] = {f.name: f for f in (BINARY64, BINARY32, BINARY16, BFLOAT16)}
_BY_NAME: dict[str, Format] = {name.lower(): f for f in FORMATS.values() for name in f.names}


class UnknownFormat(ValueError):
    """A format name that names no record."""


def format_named(name: str) -> Format:
    """The format a name or alias denotes (case does not matter): "float32" -> BINARY32."""
    found = _BY_NAME.get(name.lower()) if isinstance(name, str) else None
    if found is None:
        known = ", ".join(f"{f.name} ({', '.join(f.aliases)})" for f in FORMATS.values())
        raise UnknownFormat(f"unknown number format {name!r}: expected one of {known}")
    return found


def promote(a: Format, a_weak: bool, b: Format, b_weak: bool) -> tuple[Format, bool]:
    """The format (and weakness) of an operation on two values, as the installed numpy promotes them.

    A *weak* value is a Python float or int (a literal, an unannotated parameter): under numpy ≥ 2 (NEP 50) it
    does not widen a numpy value, so `np.float32(x) * 0.1` computes in binary32; two weak values are Python
    floats, which compute in binary64.
    """
    if a_weak and b_weak:
        return BINARY64, True
    if a_weak or b_weak:
        strong = b if a_weak else a
        return _with_python_float(strong), False
    if a is b:
        return a, False
    return _strong(a, b), False


def _with_python_float(f: Format) -> Format:
    hit = _WEAK.get(f.name)
    if hit is None:
        with np.errstate(all="ignore"):
            probe = np.ones(1, dtype=f.dtype)[0] + 1.0  # a numpy scalar with a Python float
        hit = _WEAK[f.name] = _of_dtype(np.asarray(probe).dtype)
    return hit


def _strong(a: Format, b: Format) -> Format:
    key = (a.name, b.name)
    hit = _STRONG.get(key)
    if hit is None:
        hit = _STRONG[key] = _of_dtype(np.result_type(a.dtype, b.dtype))
    return hit


def _of_dtype(dtype: np.dtype) -> Format:
    for f in FORMATS.values():
        try:
            if f.dtype == dtype:
                return f
        except (ImportError, AttributeError):
            continue
    return BINARY64


_WEAK: dict[str, Format] = {}
_STRONG: dict[tuple[str, str], Format] = {}
