"""The remedy in a wider format: compute a sensitive expression of reduced-precision code in binary64 and
round once to the code's format (`np.float32(np.float64(a) * b - …)`), for when no algebraic rewrite helps.

Products and sums of binary32 or binary16 numbers lose far less in binary64 (a product of two binary32 numbers
is even exact there); the result then carries one rounding to the code's format. Like every rule, it is only
offered when the measurement in the code's own formats verifies it.
"""
from __future__ import annotations

from fractions import Fraction

from condhint.expr import CONST, INPUT, Node, topological
from condhint.numeric.formats import BINARY64
from condhint.rewrites.context import Context
from condhint.rewrites.rules import Match, Rule


def _reduced(node: Node) -> Match | None:
    if node.is_leaf or node.kind == "cast" or not node.format.narrower_than(BINARY64):
        return None
    return {"t": node}


def _widened(m: Match, ctx: Context) -> list[Node]:
    """The target computed in binary64 from its operands (widened exactly), rounded once to its format."""
    target: Node = m["t"]
    out: dict[int, Node] = {}
    for n in topological(target):
        if n.kind == INPUT or (n.kind == "cast" and not n.args[0].weak):
            out[id(n)] = n if n.format is BINARY64 else \
                Node("cast", (n,), span=n.span, text=n.text, format=BINARY64, weak=False)
        elif n.kind == "cast":  # a Python number converted to the reduced format: used as it is
            out[id(n)] = out[id(n.args[0])]
        elif n.kind == CONST:
            out[id(n)] = _literal(n)
        else:
            out[id(n)] = Node(n.kind, tuple(out[id(a)] for a in n.args), name=n.name, is_int=n.is_int,
                              format=BINARY64, weak=False)
    return [Node("cast", (out[id(target)],), format=target.format, weak=False)]


def _literal(n: Node) -> Node:
    """A literal as Python reads it (binary64), not as the reduced format rounded it."""
    if n.format is BINARY64:
        return n
    try:
        value = float(Fraction(n.exact)) if n.exact else n.value
    except (ValueError, ZeroDivisionError):
        value = n.value
    return Node(CONST, value=value, exact=n.exact, span=n.span, is_int=n.is_int, text=n.text)


WIDER = Rule("wider-format", "Compute in float64 and round once ({text})", "code computing in binary32, binary16",
             "common practice (mixed-precision computation); Higham 2002, ch. 2", _reduced, _widened, cost=5)
