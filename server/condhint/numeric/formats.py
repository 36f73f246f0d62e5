"""Number formats: one record per IEEE 754 binary format condhint knows, and a lookup by name.

A format is fixed by its precision p (significand bits, the implicit bit included) and its largest exponent
emax; every limit the analysis uses (unit roundoff, overflow and underflow thresholds, decimal digits) is
derived from those two numbers here and read from the record everywhere else.
To add a format: one `Format(...)` listed in `FORMATS`, and its check values in tests/engine/test_formats.py.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field


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


BINARY64 = Format("binary64", ("float64", "double"), 53, 1023, "float64")
BINARY32 = Format("binary32", ("float32", "single"), 24, 127, "float32")
BINARY16 = Format("binary16", ("float16", "half"), 11, 15, "float16")
# bfloat16: binary32's exponent range with 8 significand bits. Plain numpy has no such dtype; ml_dtypes provides
# one, which condhint does not depend on (evaluation in it would need that package).
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
