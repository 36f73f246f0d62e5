"""The reference: mpmath values of a DAG at a precision checked to be enough, and relative errors against them."""
from __future__ import annotations

import math
from typing import Any

import mpmath
import numpy as np

from condhint.expr import Node
from condhint.numeric.backends import MP_BACKEND
from condhint.numeric.evaluate import Deadline, forward


ZERO_SETTLED = 320  # digits: a zero found at two precisions may be a cancellation beyond both (erf(−a) + erf(b))
BELOW_BINARY64 = mpmath.mpf(10) ** -330  # below the smallest subnormal, 4.9e−324


def reference_values(nodes: list[Node], cols: dict[str, np.ndarray], m: int, deadline: Deadline | None,
                     shallow: bool = False, zeros_settle: int = 0) -> tuple[dict[int, Any], int]:
    """mpmath values at a precision that makes the result stable (checked by re-evaluating higher).

    `shallow`: binary64 already shows that fewer than 12 digits cancel, so 50 digits leave ample margin and
    one evaluation suffices. `zeros_settle`: the precision from which two zeros (or two values below binary64's
    range) agree; `ZERO_SETTLED` where a wrong zero would matter (comparing two formulas), 0 where such a sample
    is only left out (the analysis counts no loss at a zero).
    """
    root = nodes[-1]
    if shallow:
        with mpmath.workdps(50):
            return forward(nodes, cols, MP_BACKEND, m, deadline), 50
    dps = 40
    prev = None
    while True:
        with mpmath.workdps(dps):
            vals = forward(nodes, cols, MP_BACKEND, m, deadline)
            cur = vals[id(root)]
            if prev is not None:
                with mpmath.workdps(dps):
                    ok = all(_agree(a, b, dps >= zeros_settle) for a, b in zip(prev, cur))
                if ok or dps >= 1280:
                    return vals, dps
        prev = cur
        dps = dps + 40 if dps < 80 else dps * 2


def _agree(a: Any, b: Any, zero_settled: bool = True) -> bool:
    """Two evaluations at different precisions agree to 22 digits (or are the same non-finite value); two zeros,
    or two values below binary64's range, agree only once `zero_settled`."""
    if mpmath.isnan(a) or mpmath.isnan(b):
        return bool(mpmath.isnan(a) and mpmath.isnan(b))
    if mpmath.isinf(a) or mpmath.isinf(b):
        return a == b
    if zero_settled and abs(a) < BELOW_BINARY64 and abs(b) < BELOW_BINARY64:
        return True  # no binary64 result can show the difference (nor can the verification: verify._agree)
    if b == 0:
        return False  # a zero at one precision only, or at two before they are trusted
    return abs((a - b) / b) < mpmath.mpf(10) ** -22


def relative_error(approx: float, exact: Any) -> float:
    """|approx − exact| / |exact|; nan where the exact value is undefined or zero, inf for a non-finite approx."""
    if mpmath.isnan(exact) or exact == 0:
        return math.nan
    if not math.isfinite(approx):
        return math.inf
    try:
        return abs(float((mpmath.mpf(approx) - exact) / exact))
    except (OverflowError, ValueError):
        return math.inf
