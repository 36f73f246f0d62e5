"""Samples of a site's inputs over their ranges (deterministic for a given site)."""
from __future__ import annotations

import math

from typing import Mapping

import numpy as np

from condhint.numeric.formats import Format
from condhint.site import InputRange, Interval


LITERAL = "literal"  # the range source of values the code states: `np.linspace(0, 1, n)`, `np.array([0.1, 5])`


def resolve(interval: Interval, default: tuple[float, float]) -> tuple[float, float]:
    """A bounded interval to sample: missing bounds are filled from the default magnitudes."""
    d_lo, d_hi = default
    lo, hi = interval.low, interval.high
    if not math.isfinite(lo) and not math.isfinite(hi):
        lo, hi = d_lo, d_hi
    elif not math.isfinite(hi):
        hi = d_hi if d_hi > lo else (abs(lo) * 1e6 if lo != 0 else d_hi)
        if lo < 0 <= hi:
            hi = max(hi, d_hi)
    elif not math.isfinite(lo):
        if hi > d_lo and hi > 0:
            lo = d_lo if d_lo < hi else 0.0
        else:
            lo = -d_hi if hi > -d_hi else hi * 1e6 if hi < 0 else -d_hi
    if interval.low_open:
        lo = math.nextafter(lo, math.inf) if lo != 0 else (min(abs(hi), 1.0) * 1e-12 if hi > 0 else lo)
    if interval.high_open:
        hi = math.nextafter(hi, -math.inf) if hi != 0 else (-min(abs(lo), 1.0) * 1e-12 if lo < 0 else hi)
    if lo > hi:
        lo, hi = hi, lo
    return lo, hi


def _within(default: tuple[float, float], fmt: Format | None) -> tuple[float, float]:
    if fmt is None:
        return default
    lo, hi = max(default[0], fmt.smallest_normal), min(default[1], fmt.largest)
    return (lo, hi) if lo < hi else default


def _one_sided(lo: float, hi: float, n: int) -> np.ndarray:
    """n points on [lo, hi] with 0 <= lo < hi: log-uniform over decades, uniform otherwise."""
    if lo > 0 and hi / lo > 10:
        return np.exp(np.linspace(math.log(lo), math.log(hi), n))
    if lo == 0 and hi > 0:
        half = n // 2
        return np.concatenate([np.linspace(0, hi, n - half), np.exp(np.linspace(math.log(hi * 1e-9), math.log(hi), half))])
    return np.linspace(lo, hi, n)


def points(lo: float, hi: float, n: int) -> np.ndarray:
    """n points covering [lo, hi], endpoints included."""
    if lo == hi:
        return np.full(n, lo)
    if lo >= 0:
        pts = _one_sided(lo, hi, n)
    elif hi <= 0:
        pts = -_one_sided(-hi, -lo, n)[::-1]
    else:
        share = max(2, int(round(n * (-lo) / (hi - lo))))
        neg = -_one_sided(0.0, -lo, share)
        pts = np.concatenate([neg, _one_sided(0.0, hi, max(2, n - share))])
    pts = np.clip(pts, lo, hi)
    pts[0], pts[-1] = lo, hi
    return pts


def sample(ranges: dict[str, InputRange], names: list[str], n: int, seed: int,
           default: tuple[float, float], formats: Mapping[str, Format] | None = None
           ) -> tuple[dict[str, np.ndarray], dict[str, tuple[float, float]]]:
    """Latin-hypercube style samples (each input's points shuffled independently), plus the corners. An input
    held in a narrower format (`formats`) takes the default magnitudes only within that format's normal range."""
    rng = np.random.default_rng(seed)
    bounds = {name: resolve(ranges[name].interval, _within(default, (formats or {}).get(name))) for name in names}
    cols: dict[str, np.ndarray] = {}
    corners = 2 ** len(names) if len(names) <= 4 else 0
    for name in names:
        if ranges[name].is_int and ranges[name].source == "default":
            bounds[name] = (max(bounds[name][0], 1.0), max(bounds[name][1], 1.0))  # counts and sizes
    for k, name in enumerate(names):
        lo, hi = bounds[name]
        # values the code spells out (a grid, a literal array) are spread evenly like the grid, not by magnitude
        stated = ranges[name].interval.values
        if stated:  # exactly the values the code gives (`np.array([0.1, 5, 11])`), each about as often
            pts = np.resize(np.asarray(stated, dtype=float), n)
        elif ranges[name].source.split("+")[-1] == LITERAL:
            pts = np.linspace(lo, hi, n)
        else:
            pts = points(lo, hi, n)
        if k > 0:
            pts = rng.permutation(pts)
        if corners:
            corner = np.array([hi if (c >> k) & 1 else lo for c in range(corners)])
            pts = np.concatenate([pts, corner])
        if ranges[name].is_int:
            pts = np.round(pts)
        cols[name] = pts.astype(float)
    return cols, bounds
