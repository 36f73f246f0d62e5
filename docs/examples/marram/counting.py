"""Optical particle counter: counting noise, sample weights and transforms."""
import math

import numpy as np


def poisson_noise_step(n: float) -> float:  # condhint: n in [1e6, 1e15]
    """Growth of the Poisson noise sqrt(n) when one more particle is counted."""
    if n <= 0:
        raise ValueError("count must be positive")
    return math.sqrt(n + 1) - math.sqrt(n)


def weight_change(n: float) -> float:
    """Drop in each particle's weight 1/n when the sample grows from n to n + 1."""
    # condhint: 1e3 <= n <= 1e9
    return 1.0 / n - 1.0 / (n + 1)


def asinh_counts(x: float) -> float:
    """Variance-stabilising transform of background-subtracted counts (may be < 0)."""
    # condhint: -1e4 <= x <= 1e4
    return math.log(x + math.sqrt(x * x + 1))


def combined_log_likelihood(ll_a: float, ll_b: float) -> float:
    """Log-likelihood that a particle image belongs to either of two size classes."""
    # condhint: -2000 <= ll_a <= -500, -2000 <= ll_b <= -500
    return np.log(np.exp(ll_a) + np.exp(ll_b))


def total_volume(n_small: float, n_large: float, v_small: float, v_large: float) -> float:
    """Total particle volume (m^3) of the two size classes."""
    # condhint: 1 <= n_small <= 1e6, 1 <= n_large <= 1e6
    # condhint: 1e-19 <= v_small <= 1e-16, 1e-16 <= v_large <= 1e-13
    return n_small * v_small + n_large * v_large


def median_bin(counts: list[int]) -> int:
    """Index of the lower middle size bin."""
    return (len(counts) - 1) // 2
