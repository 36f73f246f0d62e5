"""Named rules for angles computed through an inverse cosine or a law of cosines, which lose the small angles
to the rounding of a cosine near 1:

- `vector-angle`: acos(a·b / (|a|·|b|)) over 2-D or 3-D scalar components -> atan2(|a × b|, a·b), the cross
  product spelled from the same components;
- `acos-one-minus`: acos(1 − y) -> 2·atan2(√(y/2), √(1 − y/2)) for y ≥ 0 (half-angle formulas);
- `haversine`: acos(sin a·sin b + cos a·cos b·cos Δ) -> 2·atan2(√h, √k) with the haversine
  h = sin²((b − a)/2) + cos a·cos b·sin²(Δ/2) and its complement k = sin²((a + b)/2) + cos a·cos b·cos²(Δ/2), and
  the same with sin and cos exchanged (polar angles);
- `law-of-cosines`: a² + b² − 2ab·cos γ -> (a − b)² + 4ab·sin²(γ/2).
"""
from __future__ import annotations

from typing import Callable

from condhint.expr import Node
from condhint.rewrites import dag
from condhint.rewrites.context import Context
from condhint.rewrites.rule import Match, Rule


def _half(x: Node) -> Node:
    return dag.div(x, dag.const(2))


def _sin_half_squared(x: Node) -> Node:
    return dag.power(dag.call("sin", _half(x)), 2)


# ---- the angle between two vectors (Kahan 2006; common practice) ---------------------------------------------------
def _components(norm: Node) -> list[Node] | None:
    """[x, y, …] for hypot(x, y, …) (nested as the reader folds it) or sqrt(x² + y² + …)."""
    if norm.kind == "hypot":
        inner = _components(norm.args[0]) if norm.args[0].kind == "hypot" else [norm.args[0]]
        return None if inner is None else inner + [norm.args[1]]
    arg = dag.unary(norm, "sqrt")
    if arg is None:
        return None
    roots = [dag.square_of(t) for t in dag.summands(arg)]
    return None if len(roots) < 2 or any(r is None for r in roots) else roots  # type: ignore[return-value]


def _take(items: list[Node], found: Callable[[Node], bool]) -> Node | None:
    """Remove and return the first item `found` holds for (None if there is none)."""
    i = next((k for k, x in enumerate(items) if found(x)), None)
    return None if i is None else items.pop(i)


def _index(node: Node, among: list[Node]) -> int | None:
    return next((i for i, x in enumerate(among) if dag.same(x, node)), None)


def _paired(dot: Node, a: list[Node], b: list[Node]) -> list[Node] | None:
    """b reordered so that dot = Σ a[i]·b[i], or None when dot is not the dot product of these components."""
    terms = dag.summands(dot)
    if len(terms) != len(a) or len(b) != len(a):
        return None
    out: list[Node | None] = [None] * len(a)
    for t in terms:
        if t.kind != "mul":
            return None
        for p, q in (t.args, t.args[::-1]):
            i, j = _index(p, a), _index(q, b)
            if i is not None and j is not None and out[i] is None:
                out[i] = b[j]
                break
        else:
            return None
    return None if len({id(x) for x in out}) != len(a) else out  # type: ignore[return-value]


def _vector_angle_match(node: Node) -> Match | None:
    arg = dag.unary(node, "acos")
    if arg is None or arg.kind != "div":
        return None
    factors = dag.quotient_factors(arg)
    under = [f for f, e in factors if e == 1]
    over = [f for f, e in factors if e == -1]
    if len(under) != 1 or len(over) != 2:
        return None
    a, b = _components(over[0]), _components(over[1])
    if a is None or b is None or len(a) not in (2, 3):
        return None
    b = _paired(under[0], a, b)
    return None if b is None else {"dot": under[0], "a": a, "b": b}


def _cross(a: list[Node], b: list[Node], i: int, j: int) -> Node:
    return dag.sub(dag.mul(a[i], b[j]), dag.mul(a[j], b[i]))


def _vector_angle(m: Match, ctx: Context) -> list[Node]:
    a, b, dot = m["a"], m["b"], m["dot"]
    if len(a) == 2:
        return [dag.call("atan2", dag.call("abs", _cross(a, b, 0, 1)), dot)]
    norm = dag.call("hypot", dag.call("hypot", _cross(a, b, 1, 2), _cross(a, b, 2, 0)), _cross(a, b, 0, 1))
    return [dag.call("atan2", norm, dot)]


VECTOR_ANGLE = Rule(
    "vector-angle", "Compute the angle between vectors as atan2(|a × b|, a · b)", "a, b ≠ 0 (2-D or 3-D components)",
    "Kahan 2006, \"How Futile are Mindless Assessments of Roundoff…\" (angles between vectors); common practice",
    _vector_angle_match, _vector_angle)


# ---- half-angle and haversine (NIST DLMF ch. 4; Sinnott 1984) ------------------------------------------------------
def _acos_one_minus_match(node: Node) -> Match | None:
    arg = dag.unary(node, "acos")
    d = dag.difference(arg) if arg is not None else None
    return {"y": d[1]} if d is not None and dag.is_const(d[0], 1) else None


def _acos_one_minus(m: Match, ctx: Context) -> list[Node]:
    """θ = acos(1 − y) has sin(θ/2) = √(y/2) and cos(θ/2) = √(1 − y/2), both ≥ 0 for 0 ≤ y ≤ 2. atan2 of the two
    is accurate on all of it: 2·asin(√(y/2)) alone loses up to half the digits near y = 2, where the rounding
    of √(y/2) ≈ 1 is magnified as much as in acos near −1."""
    half = _half(m["y"])
    return [dag.mul(dag.const(2), dag.call("atan2", dag.call("sqrt", half),
                                           dag.call("sqrt", dag.sub(dag.const(1), half))))]


ACOS_ONE_MINUS = Rule(
    "acos-one-minus", "Write acos(1 − y) as 2·atan2(sqrt(y/2), sqrt(1 − y/2))", "0 ≤ y ≤ 2",
    "NIST DLMF ch. 4 (half-angle formulas)", _acos_one_minus_match, _acos_one_minus,
    requires=lambda m, ctx: ctx.nonneg(m["y"]))

_OTHER = {"sin": "cos", "cos": "sin"}


def _haversine_match(node: Node) -> Match | None:
    arg = dag.unary(node, "acos")
    if arg is None or arg.kind != "add":
        return None
    for two, three in (arg.args, arg.args[::-1]):
        pair, triple = dag.product_factors(two), dag.product_factors(three)
        if len(pair) != 2 or len(triple) != 3 or pair[0].kind not in _OTHER or pair[1].kind != pair[0].kind:
            continue
        g, (a, b) = _OTHER[pair[0].kind], (f.args[0] for f in pair)
        ga = _take(triple, lambda f: f.kind == g and dag.same(f.args[0], a))
        gb = _take(triple, lambda f: f.kind == g and dag.same(f.args[0], b))
        if ga is not None and gb is not None and triple[0].kind == "cos":
            return {"f": pair[0].kind, "a": a, "b": b, "ga": ga, "gb": gb, "dl": triple[0].args[0]}
    return None


def _haversine(m: Match, ctx: Context) -> list[Node]:
    """cos c = f(a)f(b) + g(a)g(b)·cos Δ, {f, g} = {sin, cos}: sin²(c/2) = h = sin²((b − a)/2) + g(a)g(b)·sin²(Δ/2)
    and, from the antipode of the second point, cos²(c/2) = k = f((a + b)/2)² + g(a)g(b)·cos²(Δ/2); h + k = 1.
    c = 2·atan2(√h, √k) is accurate near the antipodes too, where 2·asin(√h) loses as much as acos."""
    both = dag.mul(m["ga"], m["gb"])
    h = dag.add(_sin_half_squared(dag.sub(m["b"], m["a"])), dag.mul(both, _sin_half_squared(m["dl"])))
    k = dag.add(dag.power(dag.call(m["f"], _half(dag.add(m["a"], m["b"]))), 2),
                dag.mul(both, dag.power(dag.call("cos", _half(m["dl"])), 2)))
    return [dag.mul(dag.const(2), dag.call("atan2", dag.call("sqrt", h), dag.call("sqrt", k)))]


HAVERSINE = Rule(
    "haversine", "Use haversines for the spherical law of cosines", "any a, b, Δ",
    "Sinnott 1984, \"Virtues of the Haversine\" (Sky & Telescope); NIST DLMF ch. 4 (half-angle formulas)",
    _haversine_match, _haversine)


def _law_of_cosines_match(node: Node) -> Match | None:
    d = dag.difference(node)
    if d is None:
        return None
    squares = [dag.square_of(t) for t in dag.summands(d[0])]
    factors = dag.product_factors(d[1])
    if len(squares) != 2 or any(x is None for x in squares) or len(factors) != 4:
        return None
    x, y = squares
    if any(_take(factors, lambda f: dag.same(f, w)) is None for w in (x, y)):  # type: ignore[arg-type]
        return None
    two, cos = sorted(factors, key=lambda f: f.kind != "const")
    g = dag.unary(cos, "cos")
    return {"x": x, "y": y, "g": g} if dag.is_const(two, 2) and g is not None else None


LAW_OF_COSINES = Rule(
    "law-of-cosines", "Write a² + b² − 2ab·cos(γ) as (a − b)² + 4ab·sin²(γ/2)", "any a, b, γ",
    "NIST DLMF ch. 4 (half-angle formula); common practice",
    _law_of_cosines_match,
    lambda m, ctx: [dag.add(dag.power(dag.sub(m["x"], m["y"]), 2),
                            dag.mul(dag.mul(dag.mul(dag.const(4), m["x"]), m["y"]), _sin_half_squared(m["g"])))])

ANGLE_RULES: tuple[Rule, ...] = (VECTOR_ANGLE, HAVERSINE, ACOS_ONE_MINUS, LAW_OF_COSINES)
