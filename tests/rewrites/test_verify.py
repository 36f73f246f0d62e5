"""Verification (design §3): candidates that are not equivalent, or worse somewhere, are rejected; the
evidence recorded agrees with our own mpmath measurement; proofs are sympy's, within a time budget."""
from __future__ import annotations

import math
import time

import mpmath
import numpy as np

from condhint.config import Config
from condhint.rewrites import dag
from condhint.rewrites.verify import Bench, _agree, prove
from tests.rewrites.support import analysed, digits_lost, site_with


def _judge(source: str, text: str, build):
    ma = analysed(source)
    site, node = site_with(ma, text)
    bench = Bench(site, Config())
    cand = build(node)
    return bench.judge(node, cand, dag.substitute(site.root, node, cand), False, None), bench, node, cand


SQRT_DIFF = "import math\ndef f(x):  # condhint: 1e6 <= x <= 1e15\n    return math.sqrt(x + 1) - math.sqrt(x)\n"


def test_an_approximation_is_not_equivalent():
    # 1/(2·sqrt(x)) is the leading term of sqrt(x+1) − sqrt(x) (common practice), not the same function.
    ev, *_ = _judge(SQRT_DIFF, "math.sqrt(x + 1) - math.sqrt(x)",
                    lambda n: dag.div(dag.const(1), dag.mul(dag.const(2), n.args[1])))
    assert not ev.ok and ev.reason.startswith("not equivalent")


def test_an_equivalent_formula_that_is_worse_somewhere_is_rejected():
    # 1/(sqrt(x²+1) − x) equals x + sqrt(x²+1): better for x < 0, but it cancels for x > 0 (common practice).
    src = "import math\ndef f(x):  # condhint: -1e8 <= x <= 1e3\n    return x + math.sqrt(x*x + 1)\n"

    def conjugate(n):
        root = n.args[1]
        return dag.div(dag.const(1), dag.sub(root, n.args[0]))

    ev, *_ = _judge(src, "x + math.sqrt(x*x + 1)", conjugate)
    assert ev.after <= ev.before - 1 and ev.worse_by > 1
    assert not ev.ok and "worse" in ev.reason


def test_a_candidate_that_is_no_better_is_rejected():
    src = "import math\ndef f(x):  # condhint: 1e-3 <= x <= 0.1\n    return math.sqrt(x + 1) - math.sqrt(x)\n"
    ev, *_ = _judge(src, "math.sqrt(x + 1) - math.sqrt(x)",
                    lambda n: dag.div(dag.const(1), dag.add(n.args[0], n.args[1])))
    assert not ev.ok and "not accurate enough" in ev.reason


def test_recorded_evidence_matches_an_independent_measurement_on_the_same_samples():
    ev, bench, node, cand = _judge(SQRT_DIFF, "math.sqrt(x + 1) - math.sqrt(x)",
                                   lambda n: dag.div(dag.const(1), dag.add(n.args[0], n.args[1])))
    assert ev.ok and ev.proven
    xs = bench.cols["x"]
    with mpmath.workdps(60):
        before = max(digits_lost(math.sqrt(x + 1) - math.sqrt(x), mpmath.sqrt(x + 1) - mpmath.sqrt(x))
                     for x in map(float, xs))
        after = max(digits_lost(1 / (math.sqrt(x + 1) + math.sqrt(x)), mpmath.sqrt(x + 1) - mpmath.sqrt(x))
                    for x in map(float, xs))
    # The checked points are a subset of the samples that includes the worst ones (reference: mpmath).
    assert before - 0.5 <= ev.before <= before + 1e-9
    assert ev.after <= after + 1e-9 and after <= 0.5


def test_samples_include_the_ends_of_each_range():
    ma = analysed(SQRT_DIFF)
    site, _ = site_with(ma, "math.sqrt(x + 1) - math.sqrt(x)")
    bench = Bench(site, Config())
    assert np.isclose(bench.cols["x"].min(), 1e6) and np.isclose(bench.cols["x"].max(), 1e15)


def test_proofs_use_sympy_and_give_up_within_their_budget():
    ma = analysed(SQRT_DIFF)
    site, node = site_with(ma, "math.sqrt(x + 1) - math.sqrt(x)")
    bench = Bench(site, Config())
    good = dag.div(dag.const(1), dag.add(node.args[0], node.args[1]))
    assert prove(node, good, bench, 2.0)
    wrong = dag.div(dag.const(1), dag.mul(dag.const(2), node.args[1]))
    t0 = time.perf_counter()
    assert not prove(node, wrong, bench, 0.5)
    assert time.perf_counter() - t0 < 2.0


PLANCK = ("from math import exp, expm1, log\n"
          "def entropy(lam):  # condhint: 1 <= lam <= 1e6\n"
          "    C = -expm1(-lam)\n"
          "    return lam * exp(-lam) / C - log(C)\n")


def test_values_below_binary64_range_agree():
    # For λ ≳ 750 the entropy, about λ·e^−λ, is below binary64's smallest subnormal, and the reference
    # of log(C) = log(1 − e^−λ) needs over 320 digits to differ from 0. A rewrite of log(C) that is exact there
    # (log1p(−e^−λ), NIST DLMF 4.2.1) must not be rejected for a disagreement no binary64 result can show.
    ev, *_ = _judge(PLANCK, "log(C)", lambda node: dag.call("log1p", dag.neg(dag.call("exp", dag.neg(
        next(n for n in _inputs(node) if n.name == "lam"))))))
    assert ev.ok, ev.reason


def _inputs(node):
    from condhint.expr import INPUT, topological
    return [n for n in topological(node) if n.kind == INPUT]
def test_an_overflowing_original_against_a_finite_candidate_that_agrees_in_mpmath_is_a_gain():
    # exp(a)·b overflows in exp(a) for a > 709.78 while the product is ordinary; exp(a/2)·b·exp(a/2) does not
    # (common practice). Its reference, mpmath at 60 digits, is that of the original.
    src = "import math\ndef f(a, b):  # condhint: 700 <= a <= 800, 1e-300 <= b <= 1e-200\n    return math.exp(a) * b\n"

    def halved(n):
        half = dag.call("exp", dag.div(n.args[0].args[0], dag.const(2)))
        return dag.mul(dag.mul(half, n.args[1]), half)

    ev, bench, *_ = _judge(src, "math.exp(a) * b", halved)
    assert ev.ok and ev.before == bench.total and ev.after <= 0.5
    with np.errstate(over="ignore"):
        overflows = [(a, b) for a, b in zip(bench.cols["a"], bench.cols["b"]) if not np.isfinite(np.exp(a) * b)]
    assert overflows
    with mpmath.workdps(60):
        assert max(digits_lost(math.exp(a / 2) * b * math.exp(a / 2), mpmath.exp(a) * b) for a, b in overflows) <= 0.5


def test_a_power_the_reference_saturates_agrees_with_the_same_value_computed_otherwise():
    # t**(x + 0.5)·e^(−t) is computed as inf by the reference where |(x + 0.5)·log2 t| > 2**14 (no format holds
    # it); the candidate's mpmath value is finite there, and beyond every format's range too.
    src = "import math\ndef f(x, t):  # condhint: 5000 <= x <= 6000, 10 <= t <= 20\n" \
          "    return t ** (x + 0.5) * math.exp(-t)\n"
    ma = analysed(src)
    site, node = site_with(ma, "t ** (x + 0.5) * math.exp(-t)")
    bench = Bench(site, Config())
    pw, ex = node.args
    cand = dag.call("exp", dag.sub(dag.mul(pw.args[1], dag.call("log", pw.args[0])), ex.args[0].args[0]))
    idx = np.arange(4)
    orig = bench.reference(site.root, idx, None)
    other = bench.reference(dag.substitute(site.root, node, cand), idx, None)
    assert all(mpmath.isinf(r) and _agree(r, c, 1e-20) for (r, _), (c, _) in zip(orig, other))
    assert not _agree(mpmath.inf, mpmath.mpf(10) ** 400, 1e-20)  # inf against a value some format could hold
    assert not _agree(mpmath.inf, -mpmath.mpf(2) ** 20000, 1e-20)  # nor against the other sign
