"""Plankton culture growth over short intervals."""
import math
from math import exp, log


def specific_growth_rate(n0: float, n1: float, dt: float) -> float:
    """Specific growth rate (1/day) between two nearby cell counts dt days apart."""
    # condhint: 1e6 <= n0 <= 1.001e6, 1e6 <= n1 <= 1.001e6, 0.01 <= dt <= 1
    return (log(n1) - log(n0)) / dt


def fraction_grown(rate: float, dt: float) -> float:
    """Fractional increase of a culture growing at `rate` (1/s) for dt seconds."""
    # condhint: 1e-6 <= rate <= 1e-3, 1e-6 <= dt <= 1
    return exp(rate * dt) - 1


def continuous_rate(fraction: float) -> float:
    """Continuous rate equivalent to a per-step fractional increase."""
    # condhint: 1e-12 <= fraction <= 1e-3
    return log(1 + fraction)


def fraction_grown_checked(x: float) -> float:
    """exp(x) - 1 for any exponent: tanh form near zero, direct form elsewhere."""
    # condhint: 1e-12 <= x <= 30
    if abs(x) < 1.0:
        # tanh(x/2) = (e^x - 1)/(e^x + 1), hence e^x - 1 = 2t/(1 - t): no cancellation
        t = math.tanh(0.5 * x)
        return 2.0 * t / (1.0 - t)
    return exp(x) - 1
