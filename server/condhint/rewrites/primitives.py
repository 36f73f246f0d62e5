"""Cancellation-free primitives found by normalising the cancelling operands, instead of one rule per pattern.

A difference `P − Q` whose operands are close is `Q·(P/Q − 1)`; when the ratio `P/Q` normalises to a power
or exponential `exp(L)` (sympy's `powsimp`/`together` on the two operands, named values opened one level) the
difference is `Q·expm1(L)` with `L` spelled through `log1p` where a base is near one. `log(A)` with `A` near
one is `log1p(A − 1)` with `A − 1` normalised the same way; `cos(u) − 1` is `−2·sin²(u/2)`. So
`x**p − 1`, `(1 + x)**p − 1`, `1 − (1 + x)**(−c)`, `1 − 1/sqrt(1 + z)`, `1/sqrt(1 − b*b) − 1`,
`log(cos t)` and `log(x + (1 − x)·exp(−k))` all come from the same three primitives (expm1, log1p and the
half-angle form of cos − 1; NIST DLMF ch. 4, Goldberg 1991). Everything proposed here is only a candidate:
`verify` measures it like any other rewrite.
"""
from __future__ import annotations

from fractions import Fraction
from typing import Any, Callable, Iterator

import numpy as np
import sympy as sp

from condhint.budget import OverBudget
from condhint.expr import CONST, SELECT, Node, topological
from condhint.once import once_with_budget
from condhint.rewrites import codegen, dag, sym
from condhint.rewrites.context import Context

Expr = Any  # a sympy expression
MAX_CANDIDATES = 6
MAX_OPS = 40  # longer normal forms are not what a person would write
SYMPY_SECONDS = 1.0  # for all the normal forms of one target (a few sympy calls of ~0.05 s each when warm)


# ---- the primitives on sympy expressions -------------------------------------------------------------------------
def _expm1() -> Any:
    return sym.named("expm1")


def _log1p() -> Any:
    return sym.named("log1p")


def log_of(base: Expr, branch: bool = False, guard: Expr = sp.true) -> Expr:
    """log(base) without cancellation: `log1p(base − 1)` when `base − 1` normalises to something other than
    itself (`1 + x` gives `log1p(x)`, `(1 − q)/(1 + q)` gives `log1p(−2q/(1 + q))`, `x` stays `log(x)`).
    `log1p(d)` is only good near d = 0: far from it (a base near 0) `1 + d` cancels inside log1p where `base` may
    be exact. `branch` writes the choice out: log1p(d) where |d| < 1/2, log(base) elsewhere. Where `guard` is
    false, the result is not used: the logarithm is then of 1 (numpy's `where` computes both sides)."""
    near = [f for f in _normal_forms(base - 1) if f.as_coeff_Add()[0] == 0]
    if not near:
        return sp.log(_where(guard, base, 1))
    d = near[0]
    safe = _log1p()(_where(guard, d, 0))
    return sp.Piecewise((safe, sp.Abs(d) < sp.Rational(1, 2)), (sp.log(_where(guard, base, 1)), True)) if branch \
        else safe


def _where(cond: Expr, then: Expr, otherwise: Expr) -> Expr:
    return then if cond == sp.true else sp.Piecewise((then, cond), (otherwise, True))


def _log1p_direct(e: Expr) -> Expr:
    """Every log(1 + t) in `e` as log1p(t), and log1p(expm1(u)) as u; nothing else changed."""
    e = e.replace(lambda x: isinstance(x, sp.log) and len(x.args) == 1 and x.args[0].as_coeff_Add()[0] == 1,
                  lambda x: _log1p()(x.args[0] - 1))
    return e.replace(lambda x: isinstance(x, _log1p()) and isinstance(x.args[0], _expm1()),
                     lambda x: x.args[0].args[0])


def _tidy_sign(e: Expr) -> Expr:
    """−(x − 1)·y as (1 − x)·y: a minus sign is taken into a difference it multiplies."""
    if not e.is_Mul or not e.could_extract_minus_sign():
        return e
    factors = list(sp.Mul.make_args(-e))
    for i, f in enumerate(factors):
        if f.is_Add and len(f.args) == 2:
            factors[i] = sp.Add(*(-a for a in f.args), evaluate=False)
            return sp.Mul(*factors, evaluate=False)
    return e


def _factor_over_atoms(e: Expr) -> Expr:
    """`e` factored with every function value and symbolic power taken as one variable, so that
    `x + (1 − x)·exp(−k) − 1` becomes `(1 − x)·(exp(−k) − 1)` rather than a polynomial in exp(k)."""
    atoms = {a for a in sp.preorder_traversal(e)
             if isinstance(a, sp.Function) or (a.is_Pow and not a.exp.is_Integer)}
    there = {a: sp.Dummy() for a in atoms}
    back = {d: a for a, d in there.items()}
    return sp.factor(e.xreplace(there)).xreplace(back)


def _exponent(t: Expr, branch: bool = False, guard: Expr = sp.true) -> Expr | None:
    """L with t = exp(L) for a power, an exponential or a product of them; None otherwise."""
    if isinstance(t, sp.exp):
        return t.args[0]
    if t.is_Pow:
        base, e = t.args
        if base is sp.E:
            return e
        if base.is_number:
            return e * sp.log(base) if base.is_positive else None
        return e * log_of(base, branch, guard)
    if t.is_Mul:
        parts = [_exponent(f, branch, guard) for f in sp.Mul.make_args(t)]
        return sp.Add(*parts) if all(p is not None for p in parts) and len(parts) > 1 else None
    return None


def _unsure_base(t: Expr) -> Expr | None:
    """The one base that may be negative of a power with a symbolic exponent in t, if any: the exponent may
    be whole where the base is negative, and the code computes b**c there (b**0.5 is undefined there anyway)."""
    bases = {f.base for f in sp.Mul.make_args(t)
             if f.is_Pow and f.base is not sp.E and not f.exp.is_number and not f.base.is_number
             and f.base.is_positive is not True}
    return bases.pop() if len(bases) == 1 else None


def minus_one(t: Expr, branch: bool = False) -> Expr | None:
    """t − 1 without cancellation for t = exp(L), a power or cos(u); None when t is none of these. Where a
    power's base may be negative, b**c − 1 is kept as written there: `expm1(c·log b)` is only b**c − 1 for b > 0."""
    if isinstance(t, sp.cos):
        return -2 * sp.sin(t.args[0] / 2) ** 2
    base = _unsure_base(t)
    if base is None:
        L = _exponent(t, branch)
        return None if L is None else _expm1()(L)
    positive = sp.StrictLessThan(0, base, evaluate=False)
    L = _exponent(t, branch, positive)
    return None if L is None else sp.Piecewise((_expm1()(L), positive), (t - 1, True))


def _with_primitives(e: Expr) -> Expr:
    """`e` with every `±t ∓ 1` inside it spelled through `minus_one` (innermost first)."""
    if e.is_Atom:
        return e
    e = e.func(*(_with_primitives(a) for a in e.args))
    if e.is_Add:
        const, rest = e.as_coeff_Add()
        if const in (1, -1) and not rest.is_Add:
            coeff, t = rest.as_coeff_Mul()
            if coeff == -const:  # ±(t − 1)
                m = minus_one(t)
                if m is not None:
                    return -const * m
    return e


def _opened_primitives(e: Expr) -> Expr:
    """expm1(u) as exp(u) − 1 and log1p(u) as log(1 + u), so that algebra sees through them
    (`−expm1(−λ) − 1` is `−exp(−λ)`); the primitives come back where they still serve."""
    e = e.replace(lambda x: isinstance(x, _expm1()), lambda x: sp.exp(x.args[0]) - 1)
    return e.replace(lambda x: isinstance(x, _log1p()), lambda x: sp.log(1 + x.args[0]))


def _normal_forms(e: Expr) -> list[Expr]:
    """Normal forms of `e` in which cancelling operands have been combined, shortest first."""
    forms: list[Expr] = []
    e = _opened_primitives(e)
    for f in (sp.together, _factor_over_atoms, sp.factor, sp.cancel, lambda x: sp.together(x.rewrite(sp.exp))):
        try:
            g = _tidy_sign(_log1p_direct(_with_primitives(f(e))))
        except (TypeError, ValueError, AttributeError, RecursionError, NotImplementedError, sp.PolynomialError):
            continue
        if g not in forms and sym.count_ops(g) <= MAX_OPS:
            forms.append(g)
    return sorted(forms, key=sym.count_ops)


# ---- candidates for a target -------------------------------------------------------------------------------------
def _difference(e: Expr) -> tuple[Expr, Expr] | None:
    """(P, Q) for e = P − Q with two terms."""
    if not e.is_Add or len(e.args) != 2:
        return None
    a, b = e.args
    if b.could_extract_minus_sign():
        return a, -b
    if a.could_extract_minus_sign():
        return b, -a
    return None


def near_one_differences(e: Expr) -> Iterator[Expr]:
    """P − Q as Q·expm1(log(P/Q)) or −P·expm1(log(Q/P)) where the ratio is a power or exponential."""
    pq = _difference(e)
    if pq is None:
        return
    p, q = pq
    orientations = ((p, q, 1), (q, p, -1))
    if 1 in (p, q):  # `t − 1` or `1 − t`: no multiplier needed, and the other way round would add one
        orientations = orientations[:1] if q == 1 else orientations[1:]
    for num, den, sign in orientations:
        ratio = sp.powsimp(sp.together(num / den), force=False)
        for branch in (False, True):
            m = minus_one(ratio, branch)
            if m is not None:
                yield sign * den * m if den != 1 else sign * m


def near_one_logs(e: Expr) -> Iterator[Expr]:
    """log(A) as log1p(A − 1) with A − 1 normalised; log10 and log2 through log."""
    scale: Expr = 1
    if isinstance(e, sp.log) and len(e.args) == 1:
        arg = e.args[0]
    elif isinstance(e, (sym.named("log10"), sym.named("log2"))):
        arg, scale = e.args[0], sp.log(10 if isinstance(e, sym.named("log10")) else 2)
    else:
        return
    expanded = sp.expand_log(sp.log(arg), force=True)
    if expanded != sp.log(arg):
        yield _log1p_direct(expanded) / scale
    for form in _normal_forms(arg - 1):
        yield _log1p_direct(_log1p()(form)) / scale


GENERATORS: dict[str, Callable[[Expr], Iterator[Expr]]] = {
    "differences": near_one_differences, "logs": near_one_logs}


def _generated(kind: str, e: Expr) -> list[Expr]:
    return list(GENERATORS[kind](e))


def _first_names(node: Node, ctx: Context) -> tuple[Node, ...]:
    """Named values the target uses directly (not through another name): these are opened one level."""
    out, stack, seen = [], list(node.args), set()
    while stack:
        n = stack.pop()
        if id(n) in seen or n.kind == CONST:
            continue
        seen.add(id(n))
        if id(n) in ctx.atoms:
            out.append(n)
        else:
            stack.extend(n.args)
    return tuple(out)


def candidates(node: Node, ctx: Context, kind: str) -> list[Node]:
    """Candidate DAGs for `node` from one generator: as written, and with its named operands opened."""
    out: list[Node] = []
    seen: set[Expr] = set()
    opened = _first_names(node, ctx)
    for op in ((), opened) if opened else ((),):
        try:
            tr = ctx.translate(node, op)
            forms = once_with_budget(_generated, (kind, tr.expr), SYMPY_SECONDS)
        except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, AttributeError):
            continue
        for form in forms:
            if form in seen or form == tr.expr or len(out) >= MAX_CANDIDATES:
                continue
            seen.add(form)
            try:
                out.append(sym.from_sympy(form, tr))
            except (sym.Untranslatable, ValueError, TypeError):
                continue
    out = [_settled(c, ctx) for c in out if any(n.kind in ("expm1", "log1p", "sin") for n in topological(c))]
    if kind == "logs":
        out += [b for c in out if (b := _branch_near_one(c, node)) is not None]
    if codegen.call_inputs(node):
        return out  # a branch would call the target's unknown functions twice: the plain form is all there is
    return [c for c in out if not _log1p_far_from_zero(c, ctx)]


def _settled(candidate: Node, ctx: Context) -> Node:
    """The candidate with each choice whose test holds on every sample taken as decided: a guard that a
    power's base is positive (`minus_one`; b**c − 1 is then only expm1(c·log b)), or log1p's near-zero branch
    (a plain log1p(d) is proposed where the samples keep |d| < 1/2 anyway)."""
    def holds(cond: Node) -> bool:
        with np.errstate(all="ignore"):
            return bool(np.all(ctx.bench.values(cond) == 1))
    while (sel := next((n for n in topological(candidate) if n.kind == SELECT and holds(n.args[0])), None)):
        candidate = dag.substitute(candidate, sel, sel.args[1], by_key=True)
    return candidate


def _log1p_far_from_zero(candidate: Node, ctx: Context) -> bool:
    """Whether an unbranched log1p(d) of the candidate sees |d| ≥ 1/2 on the samples: there 1 + d may cancel (a
    logarithm of a value near 0) and between samples it may cancel badly (log cos t near t = π/2); the candidate
    with the branch is proposed instead."""
    nodes = topological(candidate)
    guarded = {id(x) for n in nodes if n.kind == SELECT and _near_zero_test(n.args[0])  # under a branch taken
               for x in topological(n.args[1])}                                        # only where it is near 0
    for n in nodes:
        if n.kind == "log1p" and id(n) not in guarded:
            with np.errstate(all="ignore"):
                v = ctx.bench.values(n.args[0])
            if np.any(np.abs(v[np.isfinite(v)]) >= 0.5):
                return True
    return False


def _near_zero_test(cond: Node) -> bool:
    """`abs(d) < 1/2` (or sympy's form of it on a signed range, `q / (1 + q) < 1/4`), not a guard `0 < b`."""
    return not dag.is_const(cond.args[0], 0)


def _branch_near_one(candidate: Node, original: Node) -> Node | None:
    """`log1p(d)` only where |d| < 1/2, the original logarithm elsewhere: far from one, `log1p(d)` adds
    d's rounding error to a 1 + d that is no longer near one, where the original formula may be exact."""
    d = next((n.args[0] for n in topological(candidate) if n.kind == "log1p"), None)
    if d is None:
        return None
    near = dag.compare(dag.call("abs", d.args[0] if d.kind == "neg" else d), "<", dag.const(Fraction(1, 2)))
    return dag.select(near, candidate, original)


# ---- trigonometric functions near a zero: the argument measured from the nearest quarter turn ----------------------
# sin(R + m·π/2) and cos(R + m·π/2) as ±sin(R) or ±cos(R), by m mod 4 (NIST DLMF 4.14, 4.21).
QUARTER_TURNS = {"sin": (("sin", 1), ("cos", 1), ("sin", -1), ("cos", -1)),
                 "cos": (("cos", 1), ("sin", -1), ("cos", -1), ("sin", 1))}
NEAR_ZERO = 1e-3  # a sine or cosine this small has lost its argument's absolute error to relative error


def quarter_turns(node: Node, ctx: Context) -> list[Node]:
    """sin(E) or cos(E) near one of its zeros, as ±sin(R) with R = E − m·π/2 normalised by sympy so that the
    cancellation of E against the zero m·π/2 happens exactly (`cos(3π/2·α − π)` with α near 1 is
    `−sin(3π(α − 1)/2)`). m is read off the samples where the value is near zero."""
    if node.kind not in QUARTER_TURNS:
        return []
    with np.errstate(all="ignore"):
        e, v = ctx.bench.values(node.args[0]), ctx.bench.values(node)
    near = np.isfinite(v) & (np.abs(v) < NEAR_ZERO)
    turns = sorted({int(m) for m in np.round(e[near] / (np.pi / 2))})
    if not 0 < len(turns) <= 2:
        return []
    out: list[Node] = []
    opened = _first_names(node, ctx)
    for m in turns:
        for op in ((), opened) if opened else ((),):
            try:
                tr = ctx.translate(node.args[0], op)
                forms = once_with_budget(_normal_forms, (tr.expr - m * sp.pi / 2,), SYMPY_SECONDS)
            except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, AttributeError):
                continue
            kind, sign = QUARTER_TURNS[node.kind][m % 4]
            for form in forms[:1]:
                if form.has(sp.pi) and not any(t.has(sp.pi) and not t.free_symbols for t in sp.Add.make_args(form)):
                    # the quarter turn cancelled inside the normal form (3π(α − 1)/2), not left to the code (x − π/2)
                    if form.could_extract_minus_sign():  # −sin(−u) as sin(u), cos(−u) as cos(u)
                        form, sign = -form, (-sign if kind == "sin" else sign)
                    try:
                        r = sym.from_sympy(form, tr)
                    except (sym.Untranslatable, ValueError, TypeError):
                        continue
                    out.append(dag.call(kind, r) if sign == 1 else dag.negated(dag.call(kind, r)))
    return out[:MAX_CANDIDATES]


# ---- a square root against the other terms, behind up to two levels of names ---------------------------------------
def _root_term(e: Expr) -> tuple[Expr, Expr, Expr] | None:
    """(k, P, R) with e = k·sqrt(P) + R, exactly one term of e holding a square root."""
    def is_root(f: Expr) -> bool:
        return bool(f.is_Pow and f.exp == sp.Rational(1, 2))

    if not e.is_Add:
        return None
    found = [t for t in e.args if any(is_root(f) for f in sp.Mul.make_args(t))]
    if len(found) != 1:
        return None
    term = found[0]
    root = next(f for f in sp.Mul.make_args(term) if is_root(f))
    k = term / root
    if any(is_root(f) for f in sp.preorder_traversal(k)):
        return None
    return k, root.base, e - term


def _openings_to_a_root(node: Node, ctx: Context) -> list[tuple[Node, ...]]:
    """The names to open, fewest first: none, then those of the target that lead to a square root, then with
    the names their definitions use (two levels). Names that lead to no root keep their names in the fix."""
    def to_root(names: list[Node]) -> tuple[Node, ...]:
        return tuple({id(n): n for n in names if any(dag.sqrt_of(x) is not None for x in topological(n))}.values())
    first = _first_names(node, ctx)
    one = to_root(first)
    two = to_root([*first, *(m for n in first for m in _first_names(n, ctx))])
    return [(), *((one,) if one else ()), *((two,) if len(two) > len(one) else ())]


def rationalised(node: Node, ctx: Context) -> list[Node]:
    """k·sqrt(P) + R as (k²P − R²)/(k·sqrt(P) − R), the numerator normalised by sympy with as few of the target's
    names opened as show the root (`_openings_to_a_root`), so that `lambda1 - a` with
    `lambda1 = (a + c)*0.5 + delta` and `delta = (((a - c)*0.5)**2 + b*b)**0.5` becomes
    `b * b / (a / 2 + delta - c / 2)`: exact where the terms cancel. The named rules `sqrt-minus-term` and
    `conjugate` find the shapes written out in the code without sympy; this one finds those behind names.
    Where R's sign against k varies, a branch keeps the form as written where they add, dividing by 1 there
    (numpy's `where` computes both)."""
    if node.kind not in ("add", "sub"):
        return []
    try:
        for opened in _openings_to_a_root(node, ctx):
            tr = ctx.translate(node, opened)
            parts = _root_term(tr.expr)
            if parts is not None:
                break
        else:
            return []
        k, p, r = parts
        forms = once_with_budget(_normal_forms, (k * k * p - r * r,), SYMPY_SECONDS)
        if not forms:
            return []
        top, bottom = forms[0], k * sp.sqrt(p) - r
        if top.could_extract_minus_sign() and bottom.could_extract_minus_sign():
            top, bottom = -top, -bottom  # −d²/−(a + √P) as d²/(a + √P)
        num = sym.from_sympy(top, tr)
        den = sym.from_sympy(bottom, tr)
        product = sym.from_sympy(r * k, tr)  # R against k: they cancel where its sign is negative
    except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, AttributeError, sym.Untranslatable):
        return []
    if ctx.sign(product) == -1:
        return [dag.div(num, den)]
    cancels = dag.compare(product, "<", dag.const(0))
    return [dag.select(cancels, dag.div(num, dag.select(cancels, den, dag.const(1))), node)]

