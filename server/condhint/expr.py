"""Expression DAGs: the nodes a site is made of.

A node is immutable once built and shared by identity, so a formula written over several statements
stays a DAG (never an expanded tree). Nodes carry the source span they came from.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Iterator

from condhint.numeric.formats import BINARY64, Format


@dataclass(frozen=True)
class Span:
    """A source range: 1-based lines, 0-based columns counted in characters (code points)."""

    line: int
    col: int
    end_line: int
    end_col: int

    def contains(self, other: "Span") -> bool:
        return (self.line, self.col) <= (other.line, other.col) and (other.end_line, other.end_col) <= (
            self.end_line,
            self.end_col,
        )


# Node kinds that are not calls of a known function.
INPUT = "input"
CONST = "const"
COMPARE = "compare"  # boolean: args (a, b), `value` holds the operator text
SELECT = "select"  # piecewise: args (cond, if_true, if_false)


class Node:
    """One operation or leaf. `kind` is INPUT, CONST, COMPARE, SELECT or an operation id (`numeric.operations`)."""

    __slots__ = ("kind", "args", "name", "value", "exact", "span", "is_int", "text", "format", "weak", "_key", "__weakref__")

    def __init__(
        self,
        kind: str,
        args: tuple["Node", ...] = (),
        *,
        name: str | None = None,
        value: float | None = None,
        exact: str | None = None,
        span: Span | None = None,
        is_int: bool = False,
        text: str = "",
        format: Format = BINARY64,
        weak: bool = True,
    ) -> None:
        self.kind = kind
        self.args = args
        self.name = name  # INPUT: the input's name; COMPARE: the operator
        self.value = value  # CONST: the binary64 value
        self.exact = exact  # CONST: the exact value's text ("0.1", "pi", "1/3") for the reference
        self.span = span
        self.is_int = is_int
        self.text = text  # source text of the expression, for messages
        self.format = format  # the number format the operation computes in (a leaf: the format it is held in)
        self.weak = weak  # a Python number (numpy ≥ 2 does not let it widen a numpy value: NEP 50)
        self._key: str | None = None

    def __repr__(self) -> str:
        return f"Node({self.kind}, {self.text or self.name or self.value!r})"

    @property
    def is_leaf(self) -> bool:
        return self.kind in (INPUT, CONST)

    def key(self) -> str:
        """A structural key: equal keys mean equal computations (shared nodes are written once)."""
        if self._key is None:
            parts: list[str] = []
            ids: dict[int, int] = {}
            for node in topological(self):
                a = ",".join(str(ids[id(x)]) for x in node.args)
                if node.kind == INPUT:
                    item = f"i:{node.name}:{int(node.is_int)}"
                elif node.kind == CONST:
                    item = f"c:{node.exact}"
                else:
                    item = f"{node.kind}:{node.name or ''}({a})"
                if node.format is not BINARY64:  # binary64 keys stay as they were before formats existed
                    item += f"@{node.format.name}"
                ids[id(node)] = len(parts)
                parts.append(item)
            self._key = ";".join(parts)
        return self._key


def topological(root: Node) -> list[Node]:
    """Nodes reachable from `root`, each once, operands before users (iterative: deep DAGs are fine)."""
    order: list[Node] = []
    seen: set[int] = set()
    stack: list[tuple[Node, bool]] = [(root, False)]
    while stack:
        node, expanded = stack.pop()
        if expanded:
            order.append(node)
            continue
        if id(node) in seen:
            continue
        seen.add(id(node))
        stack.append((node, True))
        for arg in reversed(node.args):
            if id(arg) not in seen:
                stack.append((arg, False))
    return order


def inputs_of(nodes: list[Node]) -> list[Node]:
    return [n for n in nodes if n.kind == INPUT]


def iter_spans(nodes: list[Node]) -> Iterator[Span]:
    for n in nodes:
        if n.span is not None:
            yield n.span


def const_rounds(exact: str, value: float) -> bool:
    """Whether a literal's binary64 value differs from the number the code spells out."""
    try:
        return Fraction(exact) != Fraction(value)
    except (ValueError, ZeroDivisionError, OverflowError):
        return True  # symbolic constants (pi, e) are irrational
