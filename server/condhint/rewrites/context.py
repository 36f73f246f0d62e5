"""What a rule may ask about the place it rewrites: signs on the sampled range, and symbolic simplification
that keeps the user's names (bound sub-expressions stay symbols unless a rule opens them)."""
from __future__ import annotations

from dataclasses import dataclass, field

from condhint.budget import OverBudget
from condhint.expr import CONST, INPUT, Node
from condhint.once import once_with_budget
from condhint.rewrites import sym
from condhint.rewrites.verify import Bench


@dataclass
class Context:
    bench: Bench
    atoms: set[int] = field(default_factory=set)  # nodes code generation writes as a name
    sympy_seconds: float = 0.3

    def sign(self, node: Node) -> int:
        return self.bench.sign(node)

    def positive(self, node: Node) -> bool:
        return self.bench.sign(node) == 1

    def nonneg(self, node: Node) -> bool:
        return self.bench.nonneg(node)

    def is_positive_atom(self, node: Node) -> bool:
        return (node.kind == INPUT or id(node) in self.atoms) and self.positive(node)

    def closed(self, opened: tuple[Node, ...] = ()) -> set[int]:
        """The nodes written as names, but those in `opened`."""
        return {a for a in self.atoms if all(a != id(o) for o in opened)}

    def translate(self, node: Node, opened: tuple[Node, ...] = ()) -> sym.Translation:
        """`node` in sympy with named sub-expressions as symbols, except those in `opened` (one level)."""
        return sym.to_sympy(node, self.closed(opened), self.is_positive_atom)

    def simplest(self, node: Node, opened: tuple[Node, ...] = ()) -> Node:
        """The simplest equivalent of a rule-built `node` that sympy finds quickly (the node itself if none).

        Named operands in `opened` are looked into, so `disc - b*b` with `disc = b*b - 4*a*c` becomes `-4*a*c`
        while `c` keeps its name."""
        best, best_ops = node, _operations(node, self.atoms)
        for op in (opened, ()) if opened else ((),):
            # shorter than the node itself, counted as this translation sees it (opened names written out)
            written = _operations(node, self.closed(op))
            try:
                tr = self.translate(node, op)
                simple = once_with_budget(_simplify, (tr.expr,), self.sympy_seconds)
                ops = sym.count_ops(simple)
                if ops < written and (best is node or ops < best_ops):
                    best, best_ops = sym.from_sympy(simple, tr), ops
            except (OverBudget, RuntimeError, ValueError, TypeError, sym.Untranslatable, RecursionError,
                    ZeroDivisionError):
                continue
        return best


def _simplify(expr: object) -> object:
    import sympy as sp

    candidates = [sp.expand(expr), sp.cancel(expr), sp.factor(expr)]
    return min(candidates, key=sym.count_ops)


def _operations(node: Node, atoms: set[int]) -> int:
    """Operations written out for `node` (named sub-expressions count as one name)."""
    count, stack = 0, [node]
    while stack:
        n = stack.pop()
        if n.kind in (INPUT, CONST) or (id(n) in atoms and n is not node):
            continue
        count += 1
        stack.extend(n.args)
    return count
