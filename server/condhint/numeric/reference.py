"""The reference: mpmath values of a DAG at a precision checked to be enough, and relative errors against them."""
from __future__ import annotations

import math
from typing import Any

import mpmath
import numpy as np

from condhint.expr import Node
from condhint.numeric.backends import F64_BACKEND, MP_BACKEND
from condhint.numeric.evaluate import Deadline, forward


ZERO_SETTLED = 320  # digits: a zero found at two precisions may be a cancellation beyond both (erf(−a) + erf(b))
BELOW_BINARY64 = mpmath.mpf(10) ** -330  # below the smallest subnormal, 4.9e−324
AGREE_DIGITS = 22  # two precisions must agree to this many digits


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
    # Each sample is raised in precision only until its own value settles: a few samples of a cancelling
    # formula can need 640 digits where the others are settled at 80. Two precisions can agree because both
    # lose the same small term next to a large one (1 − e^−265 is 1 at 40 and at 80 digits): a sample settles
    # only at a precision that also spans the magnitudes of its values (`_span`).
    dps, vals, prev = 40, None, None
    todo = np.arange(m)  # the samples not settled yet
    split: bool  # whether every node's values are per sample (so that samples can be taken apart)
    floor: np.ndarray  # per sample, the least precision at which it may settle
    while True:
        sub = cols if len(todo) == m else {k: v[todo] for k, v in cols.items()}
        with mpmath.workdps(dps):
            cur_vals = forward(nodes, sub, MP_BACKEND, len(todo), deadline)
        if vals is None:
            split = _by_sample(cur_vals, m)
            floor = _span(nodes, cols, m) + AGREE_DIGITS if split else np.zeros(m)
        if vals is None or len(todo) == m:
            vals = cur_vals
        else:
            _merge(vals, cur_vals, todo)
        cur = cur_vals[id(root)]
        if prev is not None:
            with mpmath.workdps(dps):
                open_ = np.array([not _agree(a, b, dps >= zeros_settle) for a, b in zip(prev, cur)], dtype=bool)
            open_ |= floor[todo] > dps
            if not open_.any() or dps >= 1280:
                return vals, dps
            if split:
                todo, cur = todo[open_], cur[open_]
        prev = cur
        dps = dps + 40 if dps < 80 else dps * 2


def _span(nodes: list[Node], cols: dict[str, np.ndarray], m: int) -> np.ndarray:
    """Per sample, the decimal orders of magnitude between the largest and the smallest non-zero value of its
    nodes in binary64 (cheap, and bounded by the format's range: what lies beyond it no result can show)."""
    with np.errstate(all="ignore"):
        vals = forward(nodes, cols, F64_BACKEND, m)
        mags = [np.log10(np.abs(np.asarray(v, dtype=float))) for v in vals.values()
                if isinstance(v, np.ndarray) and v.dtype != bool and v.shape == (m,)]
    if not mags:
        return np.zeros(m)
    a = np.vstack(mags)
    finite = np.isfinite(a)  # zeros (−inf), infinities and nan are left out
    hi, lo = np.where(finite, a, -np.inf).max(axis=0), np.where(finite, a, np.inf).min(axis=0)
    return np.where(hi >= lo, hi - lo, 0.0)


def _by_sample(vals: dict[int, Any], m: int) -> bool:
    return all(isinstance(v, np.ndarray) and v.ndim >= 1 and len(v) == m for v in vals.values())


def _merge(vals: dict[int, Any], cur: dict[int, Any], todo: np.ndarray) -> None:
    """Write the samples `todo`, evaluated again at a higher precision, into every node's values."""
    for k, v in cur.items():
        whole = np.array(vals[k], dtype=vals[k].dtype if vals[k].dtype == v.dtype else object)
        whole[todo] = v
        vals[k] = whole


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
    return abs((a - b) / b) < mpmath.mpf(10) ** -AGREE_DIGITS


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
