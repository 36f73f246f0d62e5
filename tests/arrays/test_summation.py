"""Reductions as the code computes them, against exact sums (math.fsum, mpmath) and published error bounds."""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from condhint.numeric.array_values import forward, to_mp
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.reductions import REDUCTIONS, depth, evaluate_f64, evaluate_mp, pairwise_depth

U = 2.0**-53  # binary64 unit roundoff (IEEE 754-2019)


def test_rows_of_a_matrix_are_summed_exactly_as_a_1d_array() -> None:
    # The analysis evaluates np.sum(matrix, axis=-1); it must be numpy's own result for each 1-D row,
    # bit for bit (numpy's pairwise summation runs along a contiguous last axis): checked on numpy itself.
    rng = np.random.default_rng(1)
    for n in (3, 8, 100, 128, 129, 1000, 5000):
        m = rng.standard_normal((7, n)) * 10.0 ** rng.uniform(-3, 3, (7, n))
        got = REDUCTIONS["sum"].ufunc(m)[:, 0]
        assert np.array_equal(got, np.array([np.sum(row) for row in m]))
        assert np.array_equal(REDUCTIONS["mean"].ufunc(m)[:, 0], np.array([np.mean(row) for row in m]))


@pytest.mark.parametrize("n", [5, 64, 128, 1000, 10_000, 100_000])
def test_numpy_sum_error_within_the_pairwise_bound(n: int) -> None:
    # Higham 2002 (chapter on summation): |error| ≲ (roundings per term) · u · Σ|xᵢ|; exact sum: math.fsum
    # (Shewchuk's algorithm). The worst data for the bound: terms of one sign and similar size.
    rng = np.random.default_rng(n)
    for x in (rng.uniform(0.0, 1.0, n), rng.standard_normal(n), np.full(n, 0.1)):
        err = abs(float(np.sum(x)) - math.fsum(x))
        assert err <= pairwise_depth(n) * U * math.fsum(np.abs(x)) * 1.01 + 1e-300


def test_pairwise_depth_grows_like_log2_n_and_sequential_like_n() -> None:
    # Higham 1993/2002: recursive summation's bound is (n − 1)u Σ|xᵢ|, pairwise summation's ⌈log₂ n⌉u Σ|xᵢ|.
    # numpy sums blocks of ≤ 128 with 8 interleaved partial sums, then halves: a constant above ⌈log₂ n⌉.
    for n in (256, 4096, 10**5, 10**7):
        assert math.ceil(math.log2(n)) <= pairwise_depth(n) <= math.ceil(math.log2(n)) + 12
        assert depth("sequential", n) == n - 1
    assert pairwise_depth(10**6) - pairwise_depth(10**3) == pytest.approx(math.log2(1000), abs=1)


def test_sequential_sum_loses_what_pairwise_keeps() -> None:
    # Summing 0.1 a million times: recursive summation's error grows like n·u·Σ|xᵢ| (Higham 2002); numpy's
    # pairwise sum stays within a few ulps. Reference: math.fsum; the sequential order is np.cumsum's.
    x = np.full(10**6, 0.1)
    exact = math.fsum(x)
    seq = float(np.cumsum(x)[-1])
    pair = float(np.sum(x))
    assert abs(seq - exact) / exact > 1e-12  # many digits lost sequentially (≈ 1.3e-6 absolute, from memory)
    assert abs(pair - exact) / exact < 1e-15
    assert abs(seq - exact) <= (len(x) - 1) * U * exact  # within the recursive bound


def test_reference_reductions_are_exact_sums() -> None:
    # mpmath.fsum at 50 digits against math.fsum (correctly rounded) on cancelling data.
    rng = np.random.default_rng(3)
    m = np.concatenate([rng.standard_normal((4, 50)) * 1e16, rng.standard_normal((4, 50))], axis=1)
    m = np.concatenate([m, -m[:, :50]], axis=1)  # the large terms cancel exactly
    with mpmath.workdps(50):
        ref = evaluate_mp(REDUCTIONS["sum"], 0, to_mp(m))
        for i in range(4):
            assert float(ref[i, 0]) == math.fsum(m[i])


def test_one_pass_variance_fails_and_two_pass_does_not() -> None:
    # Chan, Golub & LeVeque 1983: Σx²/n − (Σx/n)² loses about 2·log10(mean/std) digits; two-pass (numpy's
    # np.var) does not. Data with mean 1e8 and spread 1: the one-pass form loses all 16 digits.
    rng = np.random.default_rng(7)
    x = 1e8 + rng.uniform(-1.0, 1.0, 1000)
    with mpmath.workdps(60):
        xs = [mpmath.mpf(float(v)) for v in x]
        m = mpmath.fsum(xs) / len(xs)
        exact = mpmath.fsum((v - m) ** 2 for v in xs) / len(xs)
        one_pass = np.mean(x * x) - np.mean(x) ** 2
        rel1 = abs(float((mpmath.mpf(float(one_pass)) - exact) / exact))
        rel2 = abs(float((mpmath.mpf(float(np.var(x))) - exact) / exact))
        two = np.mean((x - np.mean(x)) ** 2)
        rel3 = abs(float((mpmath.mpf(float(two)) - exact) / exact))
    assert rel1 > 0.5  # every digit lost (here the one-pass value is 0.0 against an exact 0.33)
    assert rel2 < 1e-12 and rel3 < 1e-12
    # condhint's own evaluation of the var record is numpy's np.var, its reference the exact two-pass value
    with mpmath.workdps(60):
        ours = evaluate_mp(REDUCTIONS["var"], 0, to_mp(x[None, :]))[0, 0]
        assert abs(float((ours - exact) / exact)) < 1e-40
    assert evaluate_f64(REDUCTIONS["var"], 0, x[None, :])[0, 0] == np.var(x)


def test_every_reduction_agrees_with_numpy_and_mpmath() -> None:
    # Each record's binary64 value is numpy's (or math's) own; its reference agrees to within a few ulps
    # of numpy's on ordinary data (mpmath at 50 digits).
    rng = np.random.default_rng(5)
    a, b = rng.uniform(0.5, 2.0, (3, 40)), rng.uniform(0.5, 2.0, (3, 40))
    own = {"sum": np.sum, "fsum": math.fsum, "mean": np.mean, "var": np.var, "std": np.std, "prod": np.prod,
           "norm": np.linalg.norm, "amax": np.max, "amin": np.min}
    with mpmath.workdps(50):
        for rid, fn in own.items():
            r = REDUCTIONS[rid]
            got = evaluate_f64(r, 0, a)[:, 0]
            assert np.array_equal(got, [fn(row) for row in a]), rid
            ref = evaluate_mp(r, 0, to_mp(a))[:, 0]
            assert np.allclose([float(v) for v in ref], got, rtol=1e-13, atol=0), rid
        dot = REDUCTIONS["dot"]
        assert np.array_equal(evaluate_f64(dot, 0, a, b)[:, 0], [np.dot(p, q) for p, q in zip(a, b)])
        cs = REDUCTIONS["cumsum"]
        assert np.array_equal(cs.ufunc(a), np.cumsum(a, axis=-1))
        assert np.allclose(np.frompyfunc(float, 1, 1)(cs.mp(to_mp(a))).astype(float), np.cumsum(a, axis=-1),
                           rtol=1e-14)


def test_adjoints_of_reductions_against_mpmath_diff() -> None:
    # ∂/∂x₀ of each reduction by its vector-Jacobian product, against mpmath's numerical derivative.
    from condhint.expr import INPUT, Node
    from condhint.numeric.array_values import reverse
    x = np.array([[0.7, 1.3, 2.9, 0.4, 1.1]])
    for rid in ("sum", "mean", "var", "std", "prod", "norm", "amax"):
        node_x = Node(INPUT, name="x")
        root = Node(rid, (node_x,))
        vals = forward([node_x, root], {"x": x}, F64_BACKEND)
        g = reverse([node_x, root], vals)[id(node_x)][0, 0]
        with mpmath.workdps(30):
            def f(t: mpmath.mpf) -> mpmath.mpf:
                row = np.array([[t, *[mpmath.mpf(v) for v in x[0, 1:]]]], dtype=object)
                return evaluate_mp(REDUCTIONS[rid], 0, row)[0, 0]
            want = float(mpmath.diff(f, mpmath.mpf(x[0, 0])))
        assert g == pytest.approx(want, rel=1e-9), rid
