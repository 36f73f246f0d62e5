"""Building and taking apart expression DAGs for rewrites.

Candidates are new DAGs over the same INPUT nodes as the original; untouched subtrees are the original
nodes themselves (so code generation can reuse the user's text). New nodes carry no span and no text.
"""
from __future__ import annotations

import math
from fractions import Fraction

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, Span, topological
from condhint.numeric.formats import BINARY64
from condhint.reading.dtypes import in_format, result_format


# ---- construction ------------------------------------------------------------------------------------------
def const(value: float | int | Fraction, exact: str | None = None) -> Node:
    """A literal: integers and dyadic fractions are exact; other fractions are spelled as p/q."""
    if isinstance(value, Fraction):
        if value.denominator == 1:
            return Node(CONST, value=float(value.numerator), exact=str(value.numerator))
        exact = exact or f"{value.numerator}/{value.denominator}"
        return Node(CONST, value=float(value), exact=exact)
    if isinstance(value, int) and not isinstance(value, bool):
        return Node(CONST, value=float(value), exact=str(value))
    return Node(CONST, value=float(value), exact=exact or repr(float(value)))


def op(kind: str, *args: Node) -> Node:
    return Node(kind, tuple(args))


def add(a: Node, b: Node) -> Node:
    return op("add", a, b)


def sub(a: Node, b: Node) -> Node:
    return op("sub", a, b)


def mul(a: Node, b: Node) -> Node:
    return op("mul", a, b)


def div(a: Node, b: Node) -> Node:
    return op("div", a, b)


def neg(a: Node) -> Node:
    return op("neg", a)


def call(kind: str, *args: Node) -> Node:
    return op(kind, *args)


def power(a: Node, k: int | Fraction) -> Node:
    return op("pow", a, const(Fraction(k)))


def compare(a: Node, operator: str, b: Node) -> Node:
    return Node("compare", (a, b), name=operator)


def select(cond: Node, if_true: Node, if_false: Node) -> Node:
    return Node(SELECT, (cond, if_true, if_false))


def negated(a: Node) -> Node:
    """−a written the way a person would: `x` for −(−x), `b - a` for −(a − b) (exact in floating point too)."""
    if a.kind == "neg":
        return a.args[0]
    if a.kind == "sub":
        return sub(a.args[1], a.args[0])
    return neg(a)


def scaled(c: int | Fraction, a: Node) -> Node:
    """c·a written the way a person would: `a`, `-a`, `2 * a`, `a / 2`."""
    c = Fraction(c)
    if c == 1:
        return a
    if c == -1:
        return neg(a)
    if c.numerator == 1 and c.denominator > 1:
        return div(a, const(c.denominator))
    if c.numerator == -1 and c.denominator > 1:
        return neg(div(a, const(c.denominator)))
    return mul(const(c), a)


# ---- recognising shapes --------------------------------------------------------------------------------------
def const_value(node: Node) -> Fraction | None:
    """The exact rational value of a literal, or None (irrational named constants, non-literals)."""
    if node.kind != CONST or node.exact is None:
        return None
    try:
        return Fraction(node.exact)
    except (ValueError, ZeroDivisionError):
        return None


def is_const(node: Node, value: float) -> bool:
    v = const_value(node)
    return v is not None and v == Fraction(value)


def unary(node: Node, kind: str) -> Node | None:
    """The argument when `node` is a call of the one-argument function `kind`."""
    return node.args[0] if node.kind == kind and len(node.args) == 1 else None


def sqrt_of(node: Node) -> Node | None:
    """p for sqrt(p) and p ** 0.5 (also p ** (1/2))."""
    if node.kind == "pow" and is_const(node.args[1], 0.5):
        return node.args[0]
    return unary(node, "sqrt")


def square_of(node: Node) -> Node | None:
    """x for x*x, x**2, square(x)."""
    if node.kind == "mul" and same(node.args[0], node.args[1]):
        return node.args[0]
    if node.kind == "pow" and is_const(node.args[1], 2):
        return node.args[0]
    if node.kind == "square":
        return node.args[0]
    return None


def same(a: Node, b: Node) -> bool:
    return a is b or a.key() == b.key()


def signed_terms(node: Node) -> tuple[tuple[int, Node], tuple[int, Node]] | None:
    """A two-term sum as ((s1, t1), (s2, t2)) with node = s1·t1 + s2·t2 and sᵢ = ±1 (negations unwrapped)."""
    if node.kind not in ("add", "sub"):
        return None
    a, b = node.args
    sa, sb = 1, (1 if node.kind == "add" else -1)
    if a.kind == "neg":
        sa, a = -sa, a.args[0]
    if b.kind == "neg":
        sb, b = -sb, b.args[0]
    return (sa, a), (sb, b)


def difference(node: Node) -> tuple[Node, Node] | None:
    """(a, b) when node computes a − b: `a - b`, `a + -b`, `-b + a`."""
    terms = signed_terms(node)
    if terms is None:
        return None
    (sa, a), (sb, b) = terms
    if sa == 1 and sb == -1:
        return a, b
    if sa == -1 and sb == 1:
        return b, a
    return None


def product_factors(node: Node, within: "Span | None" = None) -> list[Node]:
    """The factors of a chain of multiplications (a*b*c -> [a, b, c]), written in one place: a product
    inlined from another statement (a named value) stays one factor."""
    within = within or node.span
    if node.kind == "mul" and (node.span is None or within is None or within.contains(node.span)):
        return product_factors(node.args[0], within) + product_factors(node.args[1], within)
    return [node]


def quotient_factors(node: Node, within: "Span | None" = None) -> list[tuple[Node, int]]:
    """The factors of a chain of multiplications and divisions with their exponents ±1 (a*b/c -> [(a, 1),
    (b, 1), (c, -1)]), written in one place like `product_factors`."""
    within = within or node.span
    if node.kind in ("mul", "div") and (node.span is None or within is None or within.contains(node.span)):
        e = 1 if node.kind == "mul" else -1
        return quotient_factors(node.args[0], within) + [(f, s * e) for f, s in quotient_factors(node.args[1], within)]
    return [(node, 1)]


def summands(node: Node, within: "Span | None" = None) -> list[Node]:
    """The terms of a chain of additions (a + b + c -> [a, b, c]), written in one place like `product_factors`."""
    within = within or node.span
    if node.kind == "add" and (node.span is None or within is None or within.contains(node.span)):
        return summands(node.args[0], within) + summands(node.args[1], within)
    return [node]


def one_plus(node: Node) -> Node | None:
    """u when node computes 1 + u (u = −v for 1 − v; the literal one on either side)."""
    terms = signed_terms(node)
    if terms is None:
        return None
    for (s1, one), (s2, u) in (terms, terms[::-1]):
        if s1 == 1 and one.kind == CONST and is_const(one, 1):
            return u if s2 == 1 else neg(u)
    return None


def inputs(node: Node) -> set[str]:
    return {n.name for n in topological(node) if n.kind == INPUT and n.name is not None}


def substitute(root: Node, target: Node, replacement: Node, by_key: bool = False) -> Node:
    """`root` with the node `target` replaced (by identity, or every node computing the same with `by_key`);
    shared structure is kept."""
    if root is target or (by_key and same(root, target)):
        return replacement
    done: dict[int, Node] = {id(target): replacement}
    key = target.key() if by_key else None
    for node in topological(root):
        if key is not None and node.key() == key:
            done[id(node)] = replacement
            continue
        if id(node) in done or not node.args:
            continue
        args = tuple(done.get(id(a), a) for a in node.args)
        if any(x is not y for x, y in zip(args, node.args)):
            done[id(node)] = Node(node.kind, args, name=node.name, value=node.value, exact=node.exact,
                                  is_int=node.is_int)
    return done.get(id(root), root)


def size(node: Node) -> int:
    return len(topological(node))


def finite(x: float) -> bool:
    return isinstance(x, float) and math.isfinite(x)


_OPERATORS = ("add", "sub", "mul", "div", "pow", "neg")  # Python's operators; other operations are calls


def typed(root: Node, kept: set[int]) -> Node:
    """A candidate whose new nodes (ids not in `kept`) compute in the formats the code would: operands
    promote as numpy promotes them, functions are numpy's (a fix in a reduced format is written with numpy),
    Python numbers meeting a narrower format are converted. A binary64 candidate is returned as it is."""
    nodes = topological(root)
    if all(n.format is BINARY64 for n in nodes):
        return root
    out: dict[int, Node] = {}
    for n in nodes:
        if id(n) in kept or n.kind in (INPUT, CONST):
            out[id(n)] = n
            continue
        args = tuple(out[id(a)] for a in n.args)
        if n.kind == "cast":  # a conversion states its own format
            out[id(n)] = Node("cast", args, span=n.span, text=n.text, format=n.format, weak=False)
            continue
        operands = tuple(a for a in args if a.kind != COMPARE)
        fmt, weak = result_format(operands, None if n.kind in _OPERATORS else "numpy") if operands else (BINARY64, True)
        if n.kind != COMPARE:
            args = tuple(a if a.kind == COMPARE else in_format(a, fmt) for a in args)
        out[id(n)] = Node(n.kind, args, name=n.name, value=n.value, exact=n.exact, span=n.span, is_int=n.is_int,
                          text=n.text, format=fmt if n.kind != COMPARE else BINARY64, weak=weak)
    return out[id(root)]
