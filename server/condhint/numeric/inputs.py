"""The samples an analysis runs on: each input's range (the assumed ones turned to where the code is defined),
and only the samples where the guards and branches around the expression let it run."""
from __future__ import annotations

import numpy as np

from condhint.config import Config
from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, topological
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import forward
from condhint.numeric.formats import BINARY64
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.sampling import sample
from condhint.site import InputRange, Interval, Site

# Magnitudes an input of unknown range ordinarily has: a loss the assumed range shows only beyond them (a level
# in dB at -1e6, an exponent of 1e6) is reported at most as information (docs/configuration.md).
ORDINARY = (1e-3, 1e3)
GUESSED = ("default", "parameter default")  # range sources that are guesses: the assumed range, a default's scale


def magnitude_guessed(r: InputRange) -> bool:
    """Whether the magnitudes an input is sampled at are a guess: its range is assumed or a default's scale, or
    the code bounds it on one side only (`if x > 0:` says nothing of how large x gets; the sampler takes the
    other end from the assumed range)."""
    return r.source in GUESSED or not r.interval.bounded



def scalar(node: Node) -> bool:
    """A node the scalar evaluation knows (not a reduction of an array)."""
    return node.kind in (INPUT, CONST, COMPARE, SELECT) or node.kind in OPERATIONS


def keep_where_guards_hold(site: Site, cols: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Drop the samples where a guard or branch on a computed value says the code does not run."""
    n = len(next(iter(cols.values()))) if cols else 0
    for flt in site.filters:
        cnodes = topological(flt.condition)
        if not {x.name for x in cnodes if x.kind == INPUT} <= set(cols) or not all(scalar(x) for x in cnodes):
            continue  # a condition on other inputs, or on arrays (a reduction): it cannot filter scalar samples
        with np.errstate(all="ignore"):
            cv = forward(cnodes, cols, F64_BACKEND, n)[id(flt.condition)]
        keep = np.asarray(cv, dtype=bool) == flt.holds
        if keep.any():
            cols = {k: v[keep] for k, v in cols.items()}
            n = int(keep.sum())
    return cols


def site_ranges(site: Site, names: list[str]) -> dict[str, InputRange]:
    return {n: site.ranges.get(n) or InputRange(Interval(), "default") for n in names}


def defined_ranges(site: Site, nodes: list[Node], names: list[str], cfg: Config, seed: int
                   ) -> dict[str, InputRange]:
    """The inputs' ranges, with assumed ones turned to negative magnitudes where the expression is defined only
    there: `log(1 - exp(x))` needs x < 0, and positive guesses would leave it undefined everywhere (the
    domains of the functions an input flows into)."""
    ranges = site_ranges(site, names)
    free = [k for k in names if ranges[k].source == "default" and not ranges[k].is_int]
    if not free:
        return ranges
    formats = {n.name: n.format for n in nodes if n.kind == INPUT and n.format is not BINARY64}

    def defined(rs: dict[str, InputRange]) -> float:
        cols, _ = sample(rs, names, 32, seed, cfg.default_range, formats)  # type: ignore[arg-type]
        with np.errstate(all="ignore"):
            v = np.asarray(forward(nodes, cols, F64_BACKEND, len(next(iter(cols.values()))))[id(nodes[-1])],
                           dtype=float)
        return float(np.mean(~np.isnan(v)))

    best, score = ranges, defined(ranges)
    if score >= 0.5:
        return ranges
    lo, hi = cfg.default_range
    for flip in [free] + ([[k] for k in free] if 1 < len(free) <= 3 else []):
        rs = {k: (InputRange(Interval(-hi, -lo), "default") if k in flip else r) for k, r in ranges.items()}
        s = defined(rs)
        if s > score + 0.25:
            best, score = rs, s
    return best
