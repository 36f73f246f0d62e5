"""Rules for the error function: a difference of two erf values written with erfc of the tails."""
from __future__ import annotations

from condhint.expr import Node
from condhint.rewrites import dag
from condhint.rewrites.context import Context
from condhint.rewrites.rule import Match, Rule


# ---- the error function (NIST DLMF 7.2.2: erfc = 1 − erf; 7.4.1: erf is odd) -----------------------------------
def _erf_difference_match(node: Node) -> Match | None:
    """erf(a) − erf(b), also written erf(a) + erf(−b) or −erf(b) + erf(a)."""
    terms = dag.signed_terms(node)
    if terms is None:
        return None
    (s1, e1), (s2, e2) = terms
    x1, x2 = dag.unary(e1, "erf"), dag.unary(e2, "erf")
    if x1 is None or x2 is None or s1 == s2 == -1:
        return None
    (_, a), (sb, b) = ((s1, x1), (s2, x2)) if s1 == 1 else ((s2, x2), (s1, x1))
    return {"a": a, "b": b if sb == -1 else dag.negated(b), "written": node}


TAIL = 0.5  # erf and erfc are both about 1/2 at 0.477: beyond, the tails are the smaller numbers


def _erf_difference_build(m: Match, ctx: Context) -> list[Node]:
    """erfc(b) − erfc(a) where both arguments lie in the upper tail, erfc(−a) − erfc(−b) where both lie in the
    lower one, the difference as written elsewhere (small arguments: erf is the accurate one there)."""
    a, b = m["a"], m["b"]
    upper = dag.sub(dag.call("erfc", b), dag.call("erfc", a))
    lower = dag.sub(dag.call("erfc", dag.negated(a)), dag.call("erfc", dag.negated(b)))
    written = m["written"]
    aware = dag.select(dag.compare(dag.call("min", a, b), ">", dag.const(TAIL)), upper,
                       dag.select(dag.compare(dag.call("max", a, b), "<", dag.const(-TAIL)), lower, written))
    sign = ctx.sign(a)
    return [upper, aware] if sign == 1 else [lower, aware] if sign == -1 else [aware]


ERF_DIFFERENCE = Rule(
    "erf-difference", "Write the difference of error functions with erfc", "any a, b",
    "NIST DLMF 7.2.2 and 7.4.1", _erf_difference_match, _erf_difference_build)
