"""Fixes in numpy code: names bound to opaque values, reductions as inputs of elementwise formulas, choices
written as `np.where` (which evaluates both branches), and Taylor branches whose switch leaves no loss.

Every fix is measured here once more, as a Python formula written in the test, against mpmath at 60 digits.
"""
from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import sympy

from tests.rewrites.support import best_fix, fixes_of, worst_loss


def _half_angle(x: float) -> float:
    """1 − cos x = 2 sin²(x/2) (NIST DLMF ch. 4, half-angle formula)."""
    return 2 * math.sin(x / 2) ** 2


def _series(terms: list[tuple[Fraction, int]], x: float) -> float:
    return sum(float(c) * x ** k for c, k in terms)


def _written(terms: list[tuple[Fraction, int]], u: str) -> str:
    """The series as the fix writes it: `u ** 3 / 6 - u ** 5 / 120 + …` (a constant term as `1 / 12`)."""
    out = ""
    for i, (c, k) in enumerate(terms):
        a = abs(c)
        base = f"{u} ** {k}" if k else "1"
        text = (f"{a.numerator} * {base}" if a.numerator != 1 else base) + f" / {a.denominator}"
        out += ("-" if c < 0 else "") + text if i == 0 else (" - " if c < 0 else " + ") + text
    return out


def _branch(text: str, where: str, orig: str) -> tuple[float, str]:
    """(switch, series text) of `where(abs(u) < switch, series, orig)`."""
    head = f"{where}(abs("
    assert text.startswith(head) and text.endswith(f", {orig})"), text
    switch, series = text[len(head):-len(orig) - 3].split(", ", 1)
    return float(switch.split(" < ")[1]), series


# ---- a name bound to an opaque value holds that value after its own assignment --------------------------------
NORM_MASK = """
import numpy as np


def rotvec_rate_factor(norms, mask):  # condhint: 1e-9 <= nm <= 1e-2
    nm = norms[mask]
    return (1 - np.cos(nm)) / nm ** 2
"""


def test_a_name_bound_to_a_subscript_is_spelled_by_the_fix():
    # `nm = norms[mask]` (scipy's rotation splines) binds `nm`; the fix on the next line may write `nm`.
    fix = best_fix(NORM_MASK)
    assert (fix.rule, fix.replacement, fix.imports) == ("one-minus-cos", "2 * np.sin(nm / 2) ** 2", [])
    pts = [(float(t),) for t in np.geomspace(1e-9, 1e-2, 60)]
    exact = lambda x: 1 - mpmath.cos(x)  # noqa: E731
    assert worst_loss(lambda x: 1 - math.cos(x), exact, pts) >= 15
    assert worst_loss(_half_angle, exact, pts) <= 0.6


def test_must_not_fire_a_name_rebound_after_its_value_was_taken():
    # `y` holds cos of the parameter; `x` is rebound before `1 - y`: `2 * np.sin(x / 2) ** 2` would use 2x.
    src = ("import numpy as np\n\n\ndef moved(x):  # condhint: 1e-9 <= x <= 1e-2\n"
           "    y = np.cos(x)\n    x = 2.0 * x\n    return 1 - y\n")
    finding, fixes, _ = fixes_of(src)
    assert finding.expression == "1 - y" and not any("x" in f.replacement for f in fixes)

