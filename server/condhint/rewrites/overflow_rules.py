"""Named rules against intermediate overflow and underflow (CH301): the result is an ordinary number, but a
part of the formula is not. Each rewrite computes the same function without the out-of-range intermediate:

- `softplus`: log(1 + eˣ), log(eˣ + 1), log1p(eˣ) -> logaddexp(0, x) (numpy files) or
  max(x, 0) + log1p(e^−|x|) (the form of `log-sum-exp` where numpy cannot be spelled);
- `exp-product`: eᵃ·b, eᵃ/c, b/eᵃ, xᵖ·e⁻ᵗ -> the exponentials and powers halved around the other factors,
  e^(a/2)·b·e^(a/2), b/e^(a/2)/e^(a/2) and (x^(p/2)·e^(−t/2))², each half about the square root of the
  out-of-range part. (One
  exponential of the summed logarithms, e^(a + log b), was tried and left out: where the halves stay in range
  it is measured worse than the original on the points without overflow, as its exponent's rounding is
  magnified by |a|; where they do not, the exponent's terms exceed 1400 and cancel, losing ≥ 3 digits.)
- `hypot-many`: √(x² + y² + z² …) -> hypot(x, y, z, …) (nested in numpy, whose hypot takes two arguments);
- `log-of-product`: log(a·b), log(a/b), log(xᵖ), log(eᵃ·b) -> sums of logarithms, where the samples show every
  factor's sign (an even power takes |x|);
- `log-one-minus-power`: log(1 − (1 + u)ᵖ), log1p(−(1 + u)ᵖ) -> log(−expm1(p·log1p u)), whose power no longer
  rounds to 1; and that only where z = p·log1p u > −log 2, the original below (Mächler's switch).

They only propose: measurement decides (an overflowing original against a finite candidate that agrees with
mpmath counts the original's loss as total), so a rewrite that merely moves rounding into an exponent on a
range without overflow is rejected there.
"""
from __future__ import annotations

import math

from condhint.expr import CONST, Node
from condhint.rewrites import dag
from condhint.rewrites.context import Context
from condhint.rewrites.rule import Match, Rule


# ---- softplus (common practice; the two-term log-sum-exp with one term e⁰) -----------------------------------------
def _softplus_match(node: Node) -> Match | None:
    inner = dag.unary(node, "log")
    u = dag.unary(node, "log1p") if inner is None else dag.one_plus(inner)  # log1p(u) or log(1 + u)
    x = dag.unary(u, "exp") if u is not None else None
    return None if x is None else {"x": x}


def _softplus_build(m: Match, ctx: Context) -> list[Node]:
    x = m["x"]
    return [dag.call("logaddexp", dag.const(0), x),
            dag.add(dag.call("max", x, dag.const(0)), dag.call("log1p", dag.call("exp", dag.neg(dag.call("abs", x)))))]


SOFTPLUS = Rule("softplus", "Compute log(1 + exp(x)) without overflow", "any x",
                "common practice (softplus; the two-term log-sum-exp)", _softplus_match, _softplus_build, cost=2)


# ---- an exponential split in halves (common practice) --------------------------------------------------------------
def _grows(f: Node) -> bool:
    """An exponential or a power: the factors whose range can leave the format's on its own."""
    return f.kind == "exp" or (f.kind == "pow" and dag.square_of(f) is None)


def _exp_product_match(node: Node) -> Match | None:
    if node.kind not in ("mul", "div"):
        return None
    factors = dag.quotient_factors(node)
    if not any(f.kind == "exp" for f, _ in factors) or sum(f.kind != CONST for f, _ in factors) < 2:
        return None
    return {"factors": factors}


def _half_of(f: Node) -> Node:
    if f.kind == "exp":
        return dag.call("exp", dag.div(f.args[0], dag.const(2)))
    k = dag.const_value(f.args[1])
    return dag.op("pow", f.args[0], dag.div(f.args[1], dag.const(2)) if k is None else dag.const(k / 2))


def _times(out: Node | None, f: Node, e: int) -> Node:
    """out·f (e = 1) or out/f (e = −1), out None standing for 1."""
    if out is None:
        return f if e == 1 else dag.div(dag.const(1), f)
    return dag.mul(out, f) if e == 1 else dag.div(out, f)


def _halved(m: Match, ctx: Context) -> Node | None:
    """Π fᵢ^eᵢ with each exponential and power split in two equal halves, h = n/d (n the halves multiplied, d
    those divided): n·(the other factors)/d·n/d, or (n/d)² when there are no others (literal factors kept
    outside); each half is about the square root of the out-of-range part."""
    factors = m["factors"]
    grows = [(f, e) for f, e in factors if _grows(f) and (f.kind == "exp" or ctx.positive(f.args[0]))]
    others = [(f, e) for f, e in factors if f.kind != CONST and not any(f is g for g, _ in grows)]
    num = den = None
    for f, e in grows:
        if e == 1:
            num = _times(num, _half_of(f), 1)
        else:
            den = _times(den, _half_of(f), 1)
    if num is None and den is None:
        return None
    if not others:
        out = dag.power(_times(num, den, -1) if den is not None else num, 2)  # type: ignore[arg-type]
    else:
        out = num
        for f, e in others:
            out = _times(out, f, e)
        for half, e in ((den, -1), (num, 1), (den, -1)):
            out = out if half is None else _times(out, half, e)
    for c, e in ((f, e) for f, e in factors if f.kind == CONST):
        out = dag.mul(c, out) if e == 1 else dag.div(out, c)
    return out


EXP_PRODUCT = Rule("exp-product", "Split the exponential in halves around its factors so no part overflows",
                   "powers with a positive base", "common practice (Cephes' Stirling formula for the gamma function)",
                   _exp_product_match, lambda m, ctx: [_halved(m, ctx)], cost=2)


# ---- hypot of more than two terms (ISO C99 hypot; Python ≥ 3.8 math.hypot takes n arguments) -----------------------
def _hypot_many_match(node: Node) -> Match | None:
    arg = dag.unary(node, "sqrt")
    if arg is None or arg.kind != "add":
        return None
    roots = [dag.square_of(t) for t in dag.summands(arg)]
    if len(roots) < 3 or any(r is None for r in roots):
        return None
    return {"xs": roots}


def _hypot_many(m: Match, ctx: Context) -> list[Node]:
    xs = m["xs"]
    out = dag.call("hypot", xs[0], xs[1])
    for x in xs[2:]:
        out = dag.call("hypot", out, x)  # written math.hypot(x, y, z) where math spells it (codegen folds)
    return [out]


HYPOT_MANY = Rule("hypot-many", "Use hypot for sqrt(x² + y² + z²)", "any x, y, z",
                  "ISO C99 hypot; Python's math.hypot (n arguments since 3.8)", _hypot_many_match, _hypot_many)


# ---- logarithm of a product (NIST DLMF 4.8.2–4.8.4 under the signs the samples show) -------------------------------
def _log_product_match(node: Node) -> Match | None:
    arg = dag.unary(node, "log")
    if arg is None or arg.kind not in ("mul", "div", "pow"):
        return None
    return {"factors": dag.quotient_factors(arg) if arg.kind != "pow" else [(arg, 1)]}


def _log_term(f: Node, ctx: Context) -> tuple[Node, int] | None:
    """(log|f|, sign of f), with log(eᵃ) = a and log(xᵖ) = p·log x (p·log|x| for an even integer p)."""
    if f.kind == "exp":
        return f.args[0], 1
    if f.kind == "pow":
        base, p = f.args
        k = dag.const_value(p)
        if ctx.positive(base):
            return dag.mul(p, dag.call("log", base)), 1
        if k is not None and k.denominator == 1 and k.numerator % 2 == 0:
            return dag.mul(p, dag.call("log", dag.call("abs", base))), 1
    v = dag.const_value(f) if f.kind == CONST else None
    s = (1 if v > 0 else -1 if v < 0 else 0) if v is not None else ctx.sign(f)
    if s == 0:
        return None
    return dag.call("log", f if s == 1 else dag.neg(f)), s


def _accumulate(total: Node | None, sign: int, term: Node) -> Node:
    """total + sign·term, written as a subtraction where the term is negative (`a - t` rather than `a + -t`)."""
    if term.kind == "neg":
        sign, term = -sign, term.args[0]
    if total is None:
        return term if sign == 1 else dag.neg(term)
    return dag.add(total, term) if sign == 1 else dag.sub(total, term)


def _log_product(m: Match, ctx: Context) -> list[Node]:
    total, sign = None, 1
    for f, e in m["factors"]:
        found = _log_term(f, ctx)
        if found is None:
            return []
        term, s = found
        total, sign = _accumulate(total, e, term), sign * s
    return [total] if total is not None and sign == 1 else []


LOG_OF_PRODUCT = Rule("log-of-product", "Write the logarithm of a product as a sum of logarithms",
                      "factors of one sign each, their product positive", "NIST DLMF 4.8.2–4.8.4",
                      _log_product_match, _log_product)


# ---- log(1 − (1 + u)ᵖ) (Mächler 2012, "Accurately computing log(1 − exp(−|a|))") -----------------------------------
def _log_one_minus_power_match(node: Node) -> Match | None:
    inner = dag.unary(node, "log")
    u = dag.unary(node, "log1p") if inner is None else dag.one_plus(inner)  # log1p(u) or log(1 + u)
    power = u.args[0] if u is not None and u.kind == "neg" else None
    base = dag.one_plus(power.args[0]) if power is not None and power.kind == "pow" else None
    return None if base is None else {"u": base, "p": power.args[1], "node": node}  # type: ignore[union-attr]


def _log_one_minus_power(m: Match, ctx: Context) -> list[Node]:
    """log(1 − e^z) with z = p·log1p(u) as log(−expm1(z)); as a second candidate only where z > −log 2, the
    original elsewhere: there (1 + u)ᵖ < 1/2 does not cancel, and the power, rounded once, is more accurate than
    e^z, whose argument's rounding is magnified by |z|."""
    z = dag.mul(m["p"], dag.call("log1p", m["u"]))
    near = dag.call("log", dag.neg(dag.call("expm1", z)))
    return [near, dag.select(dag.compare(z, ">", dag.const(-math.log(2))), near, m["node"])]


LOG_ONE_MINUS_POWER = Rule(
    "log-one-minus-power", "Compute log(1 − (1 + u)^p) through expm1 and log1p", "u > −1",
    "Mächler 2012 (log1mexp); Higham 2002 (compound interest)", _log_one_minus_power_match, _log_one_minus_power,
    requires=lambda m, ctx: ctx.positive(dag.add(dag.const(1), m["u"])))


OVERFLOW_RULES: tuple[Rule, ...] = (LOG_ONE_MINUS_POWER, LOG_OF_PRODUCT, SOFTPLUS, HYPOT_MANY, EXP_PRODUCT)
