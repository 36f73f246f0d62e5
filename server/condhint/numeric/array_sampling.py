"""Samples of a site's array inputs: one row of elements per sample, at one evaluated length.

An array's elements lie in its range (a range comment on the array, else the default). Any array whose
elements lie there is allowed, so the rows cover the shapes that matter for accuracy, not only independent
draws: half the rows are clustered around a centre taken across the range with a relative spread from 1e-12 to 1
(data with a large mean and a small spread: where one-pass moments fail, Chan, Golub & LeVeque 1983), half
spread over the whole range (log-uniform over decades, as scalars are sampled). A second array is, in a third of
the rows, a near copy of the first (distances between close points). The length evaluated is the longest the
code allows up to `LENGTH_CAP`; longer arrays are represented by it (summation error bounds grow like log₂ n
for numpy's pairwise sums and like n for sequential ones: docs/design.md).
"""
from __future__ import annotations

import math

import numpy as np

from condhint.numeric.sampling import points, resolve
from condhint.site import Interval

LENGTH_CAP = 128  # elements per evaluated array
SCREEN_SAMPLES = 48  # rows evaluated in binary64
REFERENCE_SAMPLES = 6  # rows re-evaluated in mpmath when the screen finds something


def evaluated_length(lengths: list[Interval | None], default: tuple[float, float]) -> tuple[int, float]:
    """(the length evaluated, the longest the code allows) for arrays with these declared lengths."""
    lo, hi = 1.0, math.inf
    for iv in lengths:
        iv = iv or Interval(*default)
        lo, hi = max(lo, iv.low), min(hi, iv.high)
    if not lengths or hi < lo:
        lo, hi = default
    longest = hi if math.isfinite(hi) else default[1]
    return int(max(1, min(max(longest, lo), LENGTH_CAP))), longest


def array_rows(interval: Interval, default: tuple[float, float], n: int, length: int,
               rng: np.random.Generator, like: np.ndarray | None = None) -> np.ndarray:
    """n rows of `length` elements within the interval; `like`: an earlier array some rows nearly copy."""
    lo, hi = resolve(interval, default)
    centres = rng.permutation(points(lo, hi, n))
    out = np.empty((n, length))
    half = n // 2
    spread = 10.0 ** rng.uniform(-12.0, 0.0, half)
    z = rng.uniform(-1.0, 1.0, (half, length))
    out[:half] = centres[:half, None] * (1.0 + spread[:, None] * z)
    wide = points(lo, hi, max(length, 2))
    for i in range(half, n):
        out[i] = rng.permutation(wide)[:length] if length > 1 else centres[i]
    if like is not None and like.shape == out.shape:
        near = np.arange(n) % 3 == 1
        rel = 10.0 ** rng.uniform(-12.0, -1.0, int(near.sum()))
        out[near] = like[near] * (1.0 + rel[:, None] * rng.uniform(-1.0, 1.0, (int(near.sum()), length)))
    return np.clip(out, lo, hi)


def describe_row(name: str, row: np.ndarray) -> dict[str, float]:
    """How a finding names a sampled array: its mean, its spread and its length."""
    return {f"mean({name})": float(np.mean(row)), f"std({name})": float(np.std(row)),
            f"len({name})": float(len(row))}
