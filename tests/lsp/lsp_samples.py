"""Small Python modules the language-server tests open (invented code, shaped like the demo package)."""
from __future__ import annotations

import math

import mpmath

GROWTH = '''"""Culture growth over short intervals."""
import math
from math import exp


def fraction_grown(rate: float, dt: float) -> float:
    # condhint: 1e-6 <= rate <= 1e-3, 1e-6 <= dt <= 1
    return exp(rate * dt) - 1


def total_volume(n_small: float, v_small: float, n_large: float, v_large: float) -> float:
    # condhint: 0 < n_small <= 1e6, 0 < v_small <= 1e-3, 0 < n_large <= 1e4, 0 < v_large <= 1
    return n_small * v_small + n_large * v_large


def continuous_rate(fraction: float) -> float:
    # condhint: 1e-12 <= fraction <= 1e-3
    return math.log(1 + fraction)


def strain(ratio: float) -> float:
    # condhint: 1.0001 <= ratio <= 1.01, ratio ± 0.01%
    return ratio - 1.0
'''

# Non-ASCII identifiers and an emoji string before the flagged expression, on the same line.
UNICODE = '''import math


def größe(θ: float) -> float:
    # condhint: 1e-9 <= θ <= 1e-3
    note = "🌊 wave"; return math.exp(θ) - 1.0
'''

# No declared range: the analysis uses the default range.
UNDECLARED = '''import math


def poisson_step(n):
    return math.sqrt(n + 1) - math.sqrt(n)
'''


def digits_lost_exp_minus_one(x: float) -> float:
    """Digits binary64 `exp(x) - 1` loses at x, measured against mpmath at 50 digits (reference outside
    the project: mpmath; the loss for small x is Goldberg 1991's classic example)."""
    with mpmath.workdps(50):
        exact = mpmath.expm1(mpmath.mpf(x))
        err = abs((mpmath.mpf(math.exp(x) - 1) - exact) / exact)
    u = 2.0**-53
    return math.log10(max(float(err), u) / u)
