"""Named rewrite rules: each knows what it matches, when it applies, what it builds, and where it comes from.

A rule only proposes; `verify` decides. Rules are module-level objects built from one small vocabulary
(`Rule(id, title, domain, source, cost, match, requires, build)`), collected in `RULES` in the order they are
tried. The ones sympy's `codegen.rewriting` already knows (expm1, log1p, logaddexp, log2, exp2) run
sympy's own optimisation on the target; the others work on our DAG directly.
"""
from __future__ import annotations

from fractions import Fraction
from typing import Any, Callable

from sympy.codegen import rewriting as sr

from condhint.expr import CONST, Node
from condhint.rewrites import dag, primitives, sym
from condhint.rewrites.angle_rules import ANGLE_RULES
from condhint.rewrites.context import Context
from condhint.rewrites.erf_rules import ERF_DIFFERENCE
from condhint.rewrites.overflow_rules import OVERFLOW_RULES
from condhint.rewrites.rule import Match, Rule


# ---- matchers ---------------------------------------------------------------------------------------------------
def _difference_of(kind_a: str, kind_b: str) -> Callable[[Node], Match | None]:
    """a − b with a = kind_a(x), b = kind_b(y) (kind '1' matches the literal one, '*' anything)."""

    def match(node: Node) -> Match | None:
        d = dag.difference(node)
        if d is None:
            return None
        out: Match = {"a": d[0], "b": d[1]}
        for key, kind, part in (("x", kind_a, d[0]), ("y", kind_b, d[1])):
            if kind == "1":
                if not dag.is_const(part, 1):
                    return None
            elif kind != "*":
                arg = dag.unary(part, kind)
                if arg is None:
                    return None
                out[key] = arg
        return out

    return match


def _has(kind: str) -> Callable[[Node], Match | None]:
    def match(node: Node) -> Match | None:
        from condhint.expr import topological

        return {"t": node} if any(n.kind == kind for n in topological(node)) else None

    return match


# ---- sympy's own rewrites -------------------------------------------------------------------------------------------
def _sympy_build(optims: tuple[Any, ...], produces: type) -> Callable[[Match, Context], list[Node]]:
    def build(m: Match, ctx: Context) -> list[Node]:
        tr = ctx.translate(m["t"])
        try:
            out = sr.optimize(tr.expr, optims)
        except (TypeError, ValueError, AttributeError, RecursionError):
            return []
        if out == tr.expr or not out.has(produces):
            return []
        try:
            return [sym.from_sympy(out, tr)]
        except sym.Untranslatable:
            return []

    return build


EXPM1 = Rule("expm1", "Use expm1 for exp(x) − 1", "any x", "Goldberg 1991; ISO C99 expm1 (via sympy)",
             _has("exp"), _sympy_build((sr.expm1_opt,), sym.named("expm1")))
LOG1P = Rule("log1p", "Use log1p for log(1 + x)", "x > −1", "Goldberg 1991; ISO C99 log1p (via sympy)",
             _has("log"), _sympy_build((sr.log1p_opt,), sym.named("log1p")))
LOGADDEXP = Rule("logaddexp", "Use logaddexp for log(exp(a) + exp(b))", "any a, b",
                 "common practice; numpy logaddexp (via sympy)", _has("log"),
                 _sympy_build((sr.logaddexp_opt,), sym.named("logaddexp")))
LOG2 = Rule("log2", "Use log2 for log(x) / log(2)", "x > 0", "ISO C99 log2 (via sympy)", _has("log"),
            _sympy_build((sr.log2_opt,), sym.named("log2")), cost=2)
EXP2 = Rule("exp2", "Use exp2 for 2 ** x", "any x", "ISO C99 exp2 (via sympy)", _has("pow"),
            _sympy_build((sr.exp2_opt,), sym.named("exp2")), cost=2)


def _max_plus_log1p(m: Match, ctx: Context) -> list[Node]:
    """log(exp(a) + exp(b)) = max(a, b) + log1p(exp(−|a − b|)) where logaddexp cannot be spelled."""
    arg = dag.unary(m["t"], "log")
    if arg is None or arg.kind != "add":
        return []
    a, b = (dag.unary(x, "exp") for x in arg.args)
    if a is None or b is None:
        return []
    return [dag.add(dag.call("max", a, b),
                    dag.call("log1p", dag.call("exp", dag.neg(dag.call("abs", dag.sub(a, b))))))]


LOG_SUM_EXP = Rule("log-sum-exp", "Factor out the larger exponent of log(exp(a) + exp(b))", "any a, b",
                   "common practice (sympy's two-term logsumexp rewrite)", _has("log"), _max_plus_log1p, cost=3)


# ---- square roots ------------------------------------------------------------------------------------------------
def _sqrt_difference(m: Match, ctx: Context) -> list[Node]:
    num = ctx.simplest(dag.sub(m["x"], m["y"]), (m["x"], m["y"]))
    return [dag.div(num, dag.add(m["a"], m["b"]))]


SQRT_DIFFERENCE = Rule(
    "sqrt-difference", "Rationalise the difference of square roots", "a, b ≥ 0",
    "common practice (multiply by the conjugate)", _difference_of("sqrt", "sqrt"), _sqrt_difference)


def _sqrt_and_term(node: Node) -> Match | None:
    """s·sqrt(p) + r·t with t not itself a square root."""
    terms = dag.signed_terms(node)
    if terms is None:
        return None
    for (s, root), (r, t) in (terms, terms[::-1]):
        p = dag.sqrt_of(root)
        if p is not None and dag.sqrt_of(t) is None:
            if t.kind == "neg":  # `sqrt(p) + -t`: the sign goes to r, so the code reads `+ t` and `t > 0`
                r, t = -r, t.args[0]
            elif t.kind == "mul" and (c := dag.const_value(t.args[0])) is not None and c < 0:
                r, t = -r, dag.mul(dag.const(-c), t.args[1])  # `-2 * kappa` as `2 * kappa` with the sign in r
            return {"s": s, "root": root, "p": p, "r": r, "t": t, "node": node}
    return None


def _rationalised(m: Match, ctx: Context) -> Node:
    """s·(sqrt(p) + w·t) = s·(p − t²)/(sqrt(p) − w·t); w = s·r (s = −1 turns the numerator round)."""
    w = m["s"] * m["r"]
    p, t2 = m["p"], dag.mul(m["t"], m["t"])
    num = ctx.simplest(dag.sub(p, t2) if m["s"] == 1 else dag.sub(t2, p), (m["p"], m["t"]))
    den = dag.sub(m["root"], m["t"]) if w == 1 else dag.add(m["root"], m["t"])
    return dag.div(num, den)


def _sqrt_and_term_build(m: Match, ctx: Context) -> list[Node]:
    w = m["s"] * m["r"]
    sign = ctx.sign(m["t"])
    if sign not in (0, -w):
        return []
    # sign-aware: rationalise only where the two parts cancel; the branch-free form where they cancel on every
    # sample (the measurement then tells whether the code allows the other sign, where only the branch is right)
    cond = dag.compare(m["t"], "<" if w == 1 else ">", dag.const(0))
    aware = dag.select(cond, _rationalised(m, ctx), m["node"])
    return [_rationalised(m, ctx), aware] if sign == -w else [aware]


SQRT_AND_TERM = Rule(
    "sqrt-minus-term", "Rationalise sqrt(a) − b", "a ≥ 0; applied where sqrt(a) and b have the same sign",
    "common practice (multiply by the conjugate)", _sqrt_and_term, _sqrt_and_term_build)


def _hypot_match(node: Node) -> Match | None:
    arg = dag.unary(node, "sqrt")
    if arg is None or arg.kind != "add":
        return None
    x, y = (dag.square_of(a) for a in arg.args)
    return {"x": x, "y": y} if x is not None and y is not None else None


HYPOT = Rule("hypot", "Use hypot for sqrt(x² + y²)", "any x, y", "ISO C99 hypot; common practice",
             _hypot_match, lambda m, ctx: [dag.call("hypot", m["x"], m["y"])])


# ---- algebra -----------------------------------------------------------------------------------------------------
def _squares_match(node: Node) -> Match | None:
    d = dag.difference(node)
    if d is None:
        return None
    x, y = (part if dag.is_const(part, 1) else dag.square_of(part) for part in d)  # 1 is 1²
    return {"x": x, "y": y} if x is not None and y is not None else None


def _squares_build(m: Match, ctx: Context) -> list[Node]:
    x, y = m["x"], m["y"]
    less, more = ctx.simplest(dag.sub(x, y), (x, y)), ctx.simplest(dag.add(x, y), (x, y))
    return [more if dag.is_const(less, 1) else dag.mul(less, more)]


DIFFERENCE_OF_SQUARES = Rule(
    "difference-of-squares", "Factor a² − b² as (a − b)(a + b)", "any a, b (1 counts as 1²)", "Goldberg 1991",
    _squares_match, _squares_build)


def _fractions_match(node: Node) -> Match | None:
    d = dag.difference(node)
    if d is None or d[0].kind != "div" or d[1].kind != "div":
        return None
    (p, q), (r, s) = d[0].args, d[1].args
    return {"p": p, "q": q, "r": r, "s": s}


def _combine(m: Match, ctx: Context) -> list[Node]:
    p, q, r, s = m["p"], m["q"], m["r"], m["s"]
    if dag.same(q, s):
        return [dag.div(ctx.simplest(dag.sub(p, r), (p, r)), q)]
    num = ctx.simplest(dag.sub(dag.mul(p, s), dag.mul(r, q)), (p, q, r, s))
    return [dag.div(num, dag.mul(q, s))]


COMBINE_FRACTIONS = Rule(
    "combine-fractions", "Combine the fractions into one", "denominators ≠ 0", "common practice",
    _fractions_match, _combine)


def _quotient_match(node: Node) -> Match | None:
    d = dag.difference(node)
    if d is None:
        return None
    a, b = d
    if a.kind == "div" and dag.is_const(b, 1):
        return {"n": a.args[0], "d": a.args[1], "flip": False}
    if b.kind == "div" and dag.is_const(a, 1):
        return {"n": b.args[0], "d": b.args[1], "flip": True}
    return None


def _quotient_build(m: Match, ctx: Context) -> list[Node]:
    n, d = m["n"], m["d"]
    return [dag.div(dag.sub(d, n) if m["flip"] else dag.sub(n, d), d)]


QUOTIENT_MINUS_ONE = Rule(
    "quotient-minus-one", "Write a/b − 1 as (a − b)/b", "b ≠ 0", "common practice", _quotient_match, _quotient_build)


def _log_difference(m: Match, ctx: Context) -> list[Node]:
    x, y = m["x"], m["y"]
    return [dag.call("log1p", dag.div(ctx.simplest(dag.sub(x, y), (x, y)), y))]


LOG_DIFFERENCE = Rule(
    "log-difference", "Write log(a) − log(b) as log1p((a − b)/b)", "a, b > 0", "Goldberg 1991",
    _difference_of("log", "log"), _log_difference, requires=lambda m, ctx: ctx.positive(m["x"]) and ctx.positive(m["y"]))


def _compound_match(node: Node) -> Match | None:
    if node.kind != "pow":
        return None
    base, e = node.args
    terms = dag.signed_terms(base)
    if terms is None:
        return None
    for (s1, one), (s2, y) in (terms, terms[::-1]):
        if s1 == 1 and dag.is_const(one, 1) and one.kind == CONST:
            return {"y": y if s2 == 1 else dag.neg(y), "e": e}
    return None


COMPOUND_POWER = Rule(
    "compound-power", "Compute (1 + x)^n as exp(n·log1p(x))", "x > −1", "Higham 2002 (compound interest)",
    _compound_match, lambda m, ctx: [dag.call("exp", dag.mul(m["e"], dag.call("log1p", m["y"])))],
    requires=lambda m, ctx: ctx.sign(dag.add(dag.const(1), m["y"])) == 1)


# ---- exponentials and logarithms -------------------------------------------------------------------------------------
def _exp_difference(m: Match, ctx: Context) -> list[Node]:
    x, y = m["x"], m["y"]
    if y.kind == "neg" and dag.same(y.args[0], x):
        return [dag.mul(dag.const(2), dag.call("sinh", x))]
    if x.kind == "neg" and dag.same(x.args[0], y):
        return [dag.mul(dag.const(-2), dag.call("sinh", y))]
    return [dag.mul(dag.call("exp", y), dag.call("expm1", dag.sub(x, y)))]


EXP_DIFFERENCE = Rule(
    "exp-difference", "Write exp(a) − exp(b) with sinh or expm1", "any a, b",
    "NIST DLMF ch. 4 (sinh); common practice (expm1)", _difference_of("exp", "exp"), _exp_difference)


def _asinh_match(node: Node) -> Match | None:
    arg = dag.unary(node, "log")
    if arg is None:
        return None
    sq = _sqrt_and_term(arg)
    if sq is None or sq["s"] != 1:
        return None
    inner = dag.signed_terms(sq["p"])
    if inner is None:
        return None
    for (s1, a), (s2, one) in (inner, inner[::-1]):
        x = dag.square_of(a)
        if s1 == 1 and x is not None and dag.is_const(one, 1) and dag.same(x, sq["t"]):
            return {"x": x, "sign": sq["r"], "kind": "asinh" if s2 == 1 else "acosh"}
    return None


def _asinh_build(m: Match, ctx: Context) -> list[Node]:
    if m["kind"] == "asinh":
        out = dag.call("asinh", m["x"])
        return [out if m["sign"] == 1 else dag.neg(out)]
    return [dag.call("acosh", m["x"])] if m["sign"] == 1 else []


ASINH = Rule(
    "asinh", "Use asinh for log(x + sqrt(x² + 1))", "any x (acosh: x ≥ 1)", "NIST DLMF ch. 4",
    _asinh_match, _asinh_build,
    requires=lambda m, ctx: m["kind"] == "asinh" or ctx.nonneg(dag.sub(m["x"], dag.const(1))))


# ---- values near one: cancellation-free primitives from normalised operands (`primitives.py`) ---------------------------
NEAR_ONE_DIFFERENCE = Rule(
    "near-one-difference", "Write the difference of close powers or exponentials with expm1", "P/Q > 0",
    "NIST DLMF ch. 4; Goldberg 1991; Higham 2002", lambda n: {"t": n} if n.kind in ("add", "sub") else None,
    lambda m, ctx: primitives.candidates(m["t"], ctx, "differences"))
LOG_NEAR_ONE = Rule(
    "log-near-one", "Write the logarithm of a value near one with log1p", "argument > 0",
    "Goldberg 1991; ISO C99 log1p", lambda n: {"t": n} if n.kind in ("log", "log10", "log2") else None,
    lambda m, ctx: primitives.candidates(m["t"], ctx, "logs"))
RATIONALISED = Rule(
    "rationalise", "Rationalise a square root against the other terms", "applied where they cancel",
    "common practice (multiply by the conjugate)", lambda n: {"t": n} if n.kind in ("add", "sub") else None,
    lambda m, ctx: primitives.rationalised(m["t"], ctx))
QUARTER_TURN = Rule(
    "quarter-turn", "Measure the angle from the nearest quarter turn", "any angle", "NIST DLMF 4.14, 4.21",
    lambda n: {"t": n} if n.kind in primitives.QUARTER_TURNS else None,
    lambda m, ctx: primitives.quarter_turns(m["t"], ctx))


# ---- trigonometry (NIST DLMF ch. 4: half-angle and sum-to-product) -------------------------------------------------------
def _half(x: Node) -> Node:
    return dag.div(x, dag.const(2))


def _sin_half_squared(x: Node) -> Node:
    return dag.power(dag.call("sin", _half(x)), 2)


ONE_MINUS_COS = Rule(
    "one-minus-cos", "Write 1 − cos(x) as 2·sin²(x/2)", "any x", "NIST DLMF ch. 4 (half-angle formula)",
    _difference_of("1", "cos"), lambda m, ctx: [dag.mul(dag.const(2), _sin_half_squared(m["y"]))])
COS_MINUS_ONE = Rule(
    "cos-minus-one", "Write cos(x) − 1 as −2·sin²(x/2)", "any x", "NIST DLMF ch. 4 (half-angle formula)",
    _difference_of("cos", "1"), lambda m, ctx: [dag.mul(dag.const(-2), _sin_half_squared(m["x"]))])
COS_DIFFERENCE = Rule(
    "cos-difference", "Write cos(a) − cos(b) as a product (sum-to-product)", "any a, b", "NIST DLMF ch. 4",
    _difference_of("cos", "cos"),
    lambda m, ctx: [dag.mul(dag.mul(dag.const(-2), dag.call("sin", _half(dag.add(m["x"], m["y"])))),
                            dag.call("sin", _half(dag.sub(m["x"], m["y"]))))])
SIN_DIFFERENCE = Rule(
    "sin-difference", "Write sin(a) − sin(b) as a product (sum-to-product)", "any a, b", "NIST DLMF ch. 4",
    _difference_of("sin", "sin"),
    lambda m, ctx: [dag.mul(dag.mul(dag.const(2), dag.call("cos", _half(dag.add(m["x"], m["y"])))),
                            dag.call("sin", _half(dag.sub(m["x"], m["y"]))))])


def _tan_sin(m: Match, ctx: Context) -> list[Node]:
    if not dag.same(m["x"], m["y"]):
        return []
    return [dag.mul(dag.mul(dag.const(2), m["a"]), _sin_half_squared(m["x"]))]


TAN_MINUS_SIN = Rule(
    "tan-minus-sin", "Write tan(x) − sin(x) as 2·tan(x)·sin²(x/2)", "cos x ≠ 0", "NIST DLMF ch. 4",
    _difference_of("tan", "sin"), _tan_sin)


# ---- the quadratic formula (Forsythe 1966; Goldberg 1991) -----------------------------------------------------------------
def _twice(node: Node) -> Node | None:
    """a for 2*a, a*2; the literal 1 for the literal 2."""
    if dag.is_const(node, 2):
        return dag.const(1)
    if node.kind == "mul":
        x, y = node.args
        if dag.is_const(x, 2):
            return y
        if dag.is_const(y, 2):
            return x
    return None


def _discriminant(disc: Node, b: Node, a: Node) -> Node | None:
    """c when disc = b² − 4·a·c (factors in any order and grouping); None otherwise."""
    d = dag.difference(disc)
    if d is None:
        return None
    sq, prod = d
    b2 = dag.square_of(sq)
    if b2 is None or not dag.same(b2, b):
        return None
    factors = dag.product_factors(prod)
    rest = list(factors)
    for wanted in ("4", "a"):
        for f in rest:
            if (wanted == "4" and dag.is_const(f, 4)) or (wanted == "a" and dag.same(f, a)):
                rest.remove(f)
                break
        else:
            if wanted == "a" and dag.is_const(a, 1):
                continue
            return None
    if not rest:
        return None
    c = rest[0]
    for f in rest[1:]:
        c = dag.mul(c, f)
    return c


def _quadratic_match(node: Node) -> Match | None:
    if node.kind != "div":
        return None
    num, den = node.args
    a = _twice(den)
    sq = _sqrt_and_term(num)
    if a is None or sq is None or sq["r"] != -1:
        return None
    c = _discriminant(sq["p"], sq["t"], a)
    if c is None:
        return None
    return {"a": a, "b": sq["t"], "c": c, "root": sq["root"], "s": sq["s"]}


def _quadratic_build(m: Match, ctx: Context) -> list[Node]:
    """(−b + s·√D)/(2a): the root without cancellation is q/a, q = −(b + sign(b)·√D)/2; the other is c/q."""
    a, b, c, root, s = m["a"], m["b"], m["c"], m["root"], m["s"]
    sign = ctx.sign(b)

    def over_a(q: Node) -> Node:
        return q if dag.is_const(a, 1) else dag.div(q, a)

    if sign != 0:
        q = dag.mul(dag.const(Fraction(-1, 2)), dag.add(b, root) if sign == 1 else dag.sub(b, root))
        return [dag.div(c, q)] if sign == s else []  # −b and s·√D of opposite signs cancel
    q = dag.mul(dag.const(Fraction(-1, 2)), dag.add(b, dag.call("copysign", root, b)))
    cond = dag.compare(b, ">=", dag.const(0))
    return [dag.select(cond, dag.div(c, q), over_a(q)) if s == 1 else dag.select(cond, over_a(q), dag.div(c, q))]


QUADRATIC_ROOT = Rule(
    "quadratic-root", "Choose the quadratic root without cancellation (the other from c/q)", "a ≠ 0, b² ≥ 4ac",
    "Forsythe 1966; Goldberg 1991", _quadratic_match, _quadratic_build,
    requires=lambda m, ctx: ctx.sign(m["a"]) != 0)


RULES: tuple[Rule, ...] = (  # specific identities first, general algebra last
    QUADRATIC_ROOT, ASINH, *ANGLE_RULES, LOGADDEXP, HYPOT, *OVERFLOW_RULES,
    COMPOUND_POWER, LOG_DIFFERENCE, EXP_DIFFERENCE, ONE_MINUS_COS, COS_MINUS_ONE, TAN_MINUS_SIN, COS_DIFFERENCE,
    SIN_DIFFERENCE, ERF_DIFFERENCE, EXPM1, LOG1P, NEAR_ONE_DIFFERENCE, LOG_NEAR_ONE, QUARTER_TURN, SQRT_DIFFERENCE,
    SQRT_AND_TERM, RATIONALISED,
    COMBINE_FRACTIONS, QUOTIENT_MINUS_ONE, DIFFERENCE_OF_SQUARES, LOG_SUM_EXP, LOG2, EXP2,
)
BY_ID = {r.id: r for r in RULES}
