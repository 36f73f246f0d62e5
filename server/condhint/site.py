"""Sites: the floating-point expressions extracted from source, with the input ranges they are analysed on."""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

from condhint.expr import Node, Span
from condhint.numeric.formats import BINARY64, Format


@dataclass(frozen=True)
class Interval:
    low: float = -math.inf
    high: float = math.inf
    low_open: bool = False
    high_open: bool = False
    values: tuple[float, ...] | None = None  # the only values the code gives it (`np.array([0.1, 5, 11])`)

    @classmethod
    def of_values(cls, values: "list[float] | tuple[float, ...]") -> "Interval":
        return cls(float(min(values)), float(max(values)), values=tuple(sorted({float(v) for v in values})))

    def intersect(self, other: "Interval") -> "Interval":
        lo, lo_open = max((self.low, self.low_open), (other.low, other.low_open), key=lambda t: (t[0], t[1]))
        hi, hi_open = min((self.high, not self.high_open), (other.high, not other.high_open), key=lambda t: (t[0], t[1]))
        out = Interval(lo, hi, lo_open, not hi_open)
        vals = self.values if other.values is None else other.values if self.values is None else tuple(
            v for v in self.values if v in other.values)
        if vals is not None:
            kept = tuple(v for v in vals if out.contains(v))
            return Interval.of_values(kept) if kept else Interval(1.0, 0.0)  # empty
        return out

    def contains(self, v: float) -> bool:
        return (self.low < v or (self.low == v and not self.low_open)) and (
            v < self.high or (v == self.high and not self.high_open))

    @property
    def empty(self) -> bool:
        return self.low > self.high or (self.low == self.high and (self.low_open or self.high_open))

    @property
    def bounded(self) -> bool:
        return math.isfinite(self.low) and math.isfinite(self.high)

    def __str__(self) -> str:
        return f"{'(' if self.low_open else '['}{self.low:g}, {self.high:g}{')' if self.high_open else ']'}"


def source_label(source: str) -> str:
    """How outputs name where a range came from (design §2): "declared", "assumed", or "inferred (…)"."""
    parts = list(dict.fromkeys(source.split("+")))
    if parts[0] == "comment":
        return "declared" + (f", narrowed by {', '.join(parts[1:])}" if parts[1:] else "")
    inferred = [p for p in parts if p != "default"]
    return f"inferred ({', '.join(inferred)})" if inferred else "assumed"


@dataclass(frozen=True)
class InputRange:
    """The range an input is sampled on and where that range came from."""

    interval: Interval
    source: str  # "comment", "assert", "guard", "branch", "range", "default", combined with "+" when narrowed twice
    line: int | None = None
    uncertainty: float | None = None  # declared relative uncertainty (0.01 for ±1%)
    uncertainty_abs: float | None = None  # declared absolute uncertainty
    is_int: bool = False

    def narrowed(self, interval: Interval, source: str, line: int) -> "InputRange":
        src = source if self.source == "default" else self.source if self.source.endswith(source) else \
            f"{self.source}+{source}"
        return replace(self, interval=self.interval.intersect(interval), source=src, line=line)


@dataclass(frozen=True)
class Filter:
    """A condition known to hold where the site runs (from a guard or branch) on a computed value."""

    condition: Node  # a COMPARE node
    holds: bool
    line: int


@dataclass(frozen=True)
class Binding:
    """A single assignment inlined into a site: the chain of lines a multi-statement formula spans."""

    name: str
    line: int
    span: Span


@dataclass
class Site:
    root: Node
    scope: str
    span: Span
    statement_line: int
    ranges: dict[str, InputRange] = field(default_factory=dict)  # declared or narrowed; others use the default
    filters: tuple[Filter, ...] = ()
    bindings: tuple[Binding, ...] = ()
    bindings_by_node: dict[int, Binding] = field(default_factory=dict, repr=False)
    float_format: Format = BINARY64  # the number format the expression computes in
    # operations inlined from the module's own functions: id(node) -> the chain of calls it came through
    # (`reading.inline.Call` records: function, call line, def line)
    inlined: dict[int, tuple[Any, ...]] = field(default_factory=dict, repr=False)
    arrays: dict[str, Interval | None] = field(default_factory=dict)  # array inputs -> declared length (None: default)
    # inputs -> the line after whose assignments they hold the value their text names (a fix may spell them only
    # where no assignment lies between that line and its own)
    held_after: dict[int, int] = field(default_factory=dict, repr=False)
