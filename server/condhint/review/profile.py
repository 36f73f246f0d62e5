"""Figures of one expression at chosen points: κ, predicted and measured digits lost, rounding contributions.

This is the analysis of `numeric.analysis` evaluated at every point shown (not only a refined subset):
binary64 values against the mpmath reference, adjoints in mpmath for κ and the rounding amplification.
The points sweep one input over its range with the others held at the worst case, which makes a table and
a curve a reader can follow.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import mpmath
import numpy as np

from condhint.config import Config
from condhint.expr import INPUT, Node, topological
from condhint.numeric.analysis import digits_of, metrics, reference_values, relative_error, rounds
from condhint.numeric.backends import F64_BACKEND, MP_BACKEND
from condhint.numeric.evaluate import Deadline, forward, reverse
from condhint.numeric.sampling import points


@dataclass
class Profile:
    names: list[str]
    cols: dict[str, np.ndarray]  # the points, one column per input
    kappa: np.ndarray
    predicted: np.ndarray  # digits, from the rounding amplification A
    measured: np.ndarray  # digits, binary64 against the reference
    value: np.ndarray  # the reference value (as float)
    terms: dict[int, np.ndarray] = field(default_factory=dict)  # node index -> amplification of its rounding
    nodes: list[Node] = field(default_factory=list)

    @property
    def n(self) -> int:
        return len(self.kappa)


def input_names(root: Node) -> list[str]:
    return sorted({n.name for n in topological(root) if n.kind == INPUT})  # type: ignore[misc]


def swept_input(names: list[str], bounds: dict[str, tuple[float, float]]) -> str | None:
    """The input the figures are shown against: the one whose range spans the most decades (else the widest)."""
    def spread(name: str) -> tuple[float, float]:
        lo, hi = bounds[name]
        decades = math.log10(hi / lo) if lo > 0 and hi > lo else (math.log10(lo / hi) if hi < 0 and lo < hi else 0)
        return (decades, hi - lo)

    varying = [n for n in names if bounds[n][0] != bounds[n][1]]
    return max(varying, key=spread) if varying else None


def sweep(names: list[str], bounds: dict[str, tuple[float, float]], held: dict[str, float], swept: str | None,
          n: int, is_int: set[str]) -> dict[str, np.ndarray]:
    """`n` points over the swept input's range (log-spaced across decades), the other inputs at `held`."""
    if swept is None:
        return {k: np.full(1, held[k]) for k in names}
    xs = points(*bounds[swept], n)
    if swept in is_int:
        xs = np.unique(np.round(xs))
    else:
        xs = np.unique(xs)
    return {k: xs.astype(float) if k == swept else np.full(len(xs), float(held[k])) for k in names}


def profile(root: Node, cols: dict[str, np.ndarray], cfg: Config, seconds: float = 20.0) -> Profile:
    """Evaluate `root` at the points `cols` (which must name all of its inputs)."""
    nodes = topological(root)
    names = input_names(root)
    n = len(next(iter(cols.values()))) if cols else 1
    cols = {k: np.asarray(cols[k], dtype=float) for k in names}
    u, total = root.format.unit_roundoff, root.format.digits  # counted in the format the result computes in
    rounding = [i for i, node in enumerate(nodes) if rounds(node)]
    deadline = Deadline(seconds)
    with np.errstate(all="ignore"):
        r64 = np.asarray(forward(nodes, cols, F64_BACKEND, n, deadline)[id(root)], dtype=float)
        vmp, dps = reference_values(nodes, cols, n, deadline)
        with mpmath.workdps(dps):
            adj, _ = reverse(nodes, vmp, MP_BACKEND, deadline)
            kappa, _, amp, terms = metrics(nodes, vmp, adj, names, rounding, MP_BACKEND)
            ref = vmp[id(root)]
            err = np.array([relative_error(float(a), b) for a, b in zip(r64, ref)], dtype=float)
            value = np.array([float(v) if not (mpmath.isnan(v) or mpmath.isinf(v)) else math.nan for v in ref])
        measured = digits_of(err / u, total)
        measured[np.isnan(err)] = np.nan  # undefined or zero reference: nothing to measure
        return Profile(names, cols, np.asarray(kappa, dtype=float), digits_of(amp, total), measured, value,
                       {k: np.asarray(v, dtype=float) for k, v in terms.items()}, nodes)
