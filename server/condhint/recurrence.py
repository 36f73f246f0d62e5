"""Loops read as recurrences: the names a loop carries, their values before it and after one step.

The reader (`reading/recurrences.py`) builds them; `numeric/loops.py` iterates them in binary64 and in
mpmath; `loop_findings.py` turns the measurement into findings and verified fixes.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from condhint.expr import INPUT, Node, Span, topological
from condhint.site import InputRange


@dataclass(frozen=True)
class Carried:
    """One name the loop carries: its value before the loop, its value after one step (a DAG over the
    step's inputs: the carried names themselves, the counter, the element, names fixed during the loop)."""

    name: str
    initial: Node
    update: Node
    statement: Span  # the (last) statement of the body that rebinds it
    text: str  # that statement's source text
    is_int: bool = False


@dataclass(frozen=True)
class Recurrence:
    """A `for` loop whose body is straight-line arithmetic on names."""

    carried: tuple[Carried, ...]
    trips: int  # the largest trip count the code allows (from `range` bounds or a declared length)
    trips_source: str  # how the trip count is known, for messages ("range(1000000)", "declared len(xs)")
    span: Span  # the loop's header
    scope: str
    counter: str | None = None  # `for i in range(start, …, stride)`: i = start + k·stride at step k
    start: int = 0
    stride: int = 1
    elements: tuple[str, ...] = ()  # per-step inputs (`for x in xs`, `xs[i]`): sampled afresh at every step
    ranges: dict[str, InputRange] = field(default_factory=dict)  # of the names fixed during the loop and elements
    iterated: str | None = None  # `for x in xs`: xs
    replaceable: bool = False  # the body is one statement and the loop's target is not used outside the loop
    lines: tuple[str, ...] = ()  # the source lines the loop spans (whole lines), for fixes that rewrite it
    names: frozenset[str] = frozenset()  # every name of the loop's unit (new names of a fix must be fresh)

    @property
    def state_names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.carried)

    def recurrent(self, c: Carried) -> bool:
        """Whether a step of `c` reads the values of earlier steps (not a temporary recomputed each time)."""
        return bool(_inputs(c.update) & set(self.state_names))

    def outer_inputs(self) -> list[str]:
        """Names read before the loop (by the initial values) or fixed during it (read by the steps)."""
        names: set[str] = set()
        for c in self.carried:
            names |= _inputs(c.initial) | (_inputs(c.update) - {*self.state_names, self.counter, *self.elements})
        return sorted(names)

    def key(self) -> str:
        """Equal keys mean equal measurements."""
        parts = [f"{c.name}={c.initial.key()}->{c.update.key()}" for c in self.carried]
        ranges = sorted((k, repr(v.interval), v.is_int) for k, v in self.ranges.items())
        return f"{parts}|{self.trips}|{self.counter}:{self.start}:{self.stride}|{self.elements}|{ranges}"


def _inputs(root: Node) -> set[str]:
    return {n.name for n in topological(root) if n.kind == INPUT and n.name is not None}
