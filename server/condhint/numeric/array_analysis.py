"""Analysis of a site with array inputs (reductions): κ, predicted and measured loss, category, culprit.

The same figures as `analysis` for scalar sites, computed on samples × elements matrices (`array_values`):
binary64 runs the code's own numpy routines on `SCREEN_SAMPLES` rows; when the screen shows a possible loss or
a non-finite value, `REFERENCE_SAMPLES` rows are re-evaluated with mpmath (exact reductions, precision raised
until two evaluations agree) and the loss is measured against them. κ is Σ over every element of every input of
|xᵢ ∂f/∂xᵢ| / |f| (for a sum: Σ|xᵢ| / |Σxᵢ|, Higham 2002), so a loss the data's own cancellation explains is
inherent and one beyond it (raw-moment variance) is the formula's. The culprit is the operation whose measured
error is far above its operands'. Array-valued results (softmax) report overflow and domain findings only:
their condition is normwise and not modelled here. Every figure is an estimate over sampled arrays.
"""
from __future__ import annotations

import math
import zlib
from typing import Any

import mpmath
import numpy as np

from condhint.config import Config
from condhint.expr import INPUT, Node, topological
from condhint.numeric.analysis import Analysis, rounds
from condhint.numeric.array_sampling import (REFERENCE_SAMPLES, SCREEN_SAMPLES, array_rows, describe_row,
                                             evaluated_length)
from condhint.numeric.array_values import floats, forward, normwise_error, reference, reverse
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import Deadline
from condhint.numeric.formats import BINARY64
from condhint.numeric.reductions import REDUCTIONS, depth
from condhint.numeric.sampling import sample
from condhint.site import InputRange, Interval, Site


def has_reductions(nodes: list[Node]) -> bool:
    return any(n.kind in REDUCTIONS for n in nodes)


def sample_inputs(site: Site, names: list[str], cfg: Config, seed: int, length: int | None = None
                  ) -> tuple[dict[str, np.ndarray], dict[str, tuple[float, float]], int, float]:
    """Matrices for every input (arrays: rows of elements; scalars: one column), their bounds, the length
    evaluated (`length` if given) and the longest length the code allows."""
    arrays = [k for k in names if k in site.arrays]
    scalars = [k for k in names if k not in site.arrays]
    evaluated, longest = evaluated_length([site.arrays[k] for k in arrays], cfg.array_length)
    length = length or evaluated
    rng = np.random.default_rng(seed)
    ranges = {k: site.ranges.get(k) or InputRange(Interval(), "default") for k in names}
    cols, bounds = sample(ranges, scalars, SCREEN_SAMPLES, seed, cfg.default_range)
    n = SCREEN_SAMPLES
    out = {k: v[:n, None] for k, v in cols.items()}
    for k in scalars:
        if _length_of(k) in site.arrays:  # `len(x)`, `x.size`, `x.shape[0]`: the length evaluated
            out[k] = np.full((n, 1), float(length))
            bounds[k] = (float(length), float(length))
    first: np.ndarray | None = None
    for k in arrays:
        out[k] = array_rows(ranges[k].interval, cfg.default_range, n, length, rng, like=first)
        if ranges[k].is_int:
            out[k] = np.round(out[k])  # an array of integers
        first = out[k] if first is None else first
        bounds[k] = (float(out[k].min()), float(out[k].max()))
    return out, bounds, length, longest


def _length_of(name: str) -> str | None:
    """The array whose length an input's text spells (`len(x)`, `x.size`, `x.shape[0]`), if any."""
    if name.startswith("len(") and name.endswith(")"):
        return name[4:-1]
    for suffix in (".size", ".shape[0]", ".shape[-1]"):
        if name.endswith(suffix):
            return name[: -len(suffix)]
    return None


def _rounding_terms(nodes: list[Node], vals: dict[int, Any], adj: dict[int, Any], length: int) -> np.ndarray:
    """First-order bound of the rounding error, in units of u, per sample: |v ∂f/∂v| for each elementwise
    rounding, and for a reduction its roundings per term times the size of its terms."""
    total = np.zeros(len(next(iter(adj.values()))))
    with np.errstate(all="ignore"):
        for node in nodes:
            g = adj.get(id(node))
            if g is None:
                continue
            v = np.asarray(vals[id(node)], dtype=float)
            r = REDUCTIONS.get(node.kind)
            if r is None:
                if rounds(node) and node.kind != INPUT:
                    total += np.sum(np.abs(v * g), axis=-1)
                continue
            terms = np.abs(np.asarray(vals[id(node.args[0])], dtype=float))
            if len(node.args) == 2:
                terms = terms * np.abs(np.asarray(vals[id(node.args[1])], dtype=float))
            size = np.sum(terms, axis=-1) if r.summation != "none" else 0.0
            d = depth(r.summation, length)
            if r.id in ("mean", "var", "std", "norm"):  # a sum and a final division or root
                size = size / length if r.id == "mean" else np.abs(v[:, 0]) * (2 + d)
            total += np.sum(np.abs(g), axis=-1) * (d * size + np.abs(v).sum(axis=-1))
    return total


def analyse_arrays(site: Site, cfg: Config, root: Node | None = None, deadline: Deadline | None = None,
                   keep_points: bool = False) -> Analysis:
    root = root or site.root
    nodes = topological(root)
    names = sorted({n.name for n in nodes if n.kind == INPUT})  # type: ignore[misc]
    seed = zlib.crc32(root.key().encode())
    cols, bounds, length, longest = sample_inputs(site, names, cfg, seed)
    sources = {k: (site.ranges[k].source if k in site.ranges else "default") for k in names}
    declared = any(s != "default" for s in sources.values())
    base = Analysis(names=names, bounds=bounds, sources=sources, n_samples=SCREEN_SAMPLES, refined=False,
                    kappa=math.nan, kappa_median=math.nan, kappa_at={}, kappa_i={}, predicted=0.0, measured=None,
                    declared=declared)
    base.note = f"arrays evaluated at length {length}" + (f" (the code allows up to {longest:g})"
                                                           if longest > length else "")
    if any(n.format is not BINARY64 for n in nodes):
        return base  # reductions in reduced precision are not modelled yet
    with np.errstate(all="ignore"):
        try:
            res = _analyse(site, cfg, root, nodes, names, cols, length, base, deadline)
        except (TypeError, IndexError, KeyError) as exc:  # shapes the code combines in a way not modelled
            raise ValueError(f"array code not modelled ({type(exc).__name__}: {exc})") from exc
    if res.category == "overflow" and any(v is None for v in site.arrays.values()) and \
            _finite_when_short(site, cfg, root, nodes, names, seed):
        # Only at the longer end of an assumed length (a product of many terms): like any finding toward the
        # ends of an assumed range, not reported; declaring `len(x) in [a, b]` decides it.
        res.category, res.digits = None, None
        res.note += "; overflows only at longer assumed lengths"
    return res


def _finite_when_short(site: Site, cfg: Config, root: Node, nodes: list[Node], names: list[str], seed: int) -> bool:
    """Whether the result is finite on the same kind of samples at the shortest assumed length."""
    short = int(max(2, cfg.array_length[0]))
    cols, _, _, _ = sample_inputs(site, names, cfg, seed, length=short)
    with np.errstate(all="ignore"):
        v = np.asarray(forward(nodes, cols, F64_BACKEND)[id(root)], dtype=float)
    return bool(np.all(np.isfinite(v)))


def _analyse(site: Site, cfg: Config, root: Node, nodes: list[Node], names: list[str],
             cols: dict[str, np.ndarray], length: int, res: Analysis, deadline: Deadline | None) -> Analysis:
    u, total, th = BINARY64.unit_roundoff, BINARY64.digits, cfg.thresholds
    scalar_root = _is_column(root, nodes, set(site.arrays))
    v64 = forward(nodes, cols, F64_BACKEND, deadline)
    f64 = np.asarray(v64[id(root)], dtype=float)
    f64 = f64 if f64.ndim == 2 else np.broadcast_to(f64, (SCREEN_SAMPLES, 1))
    fin = np.all(np.isfinite(f64), axis=-1)
    inner_bad = np.zeros(SCREEN_SAMPLES, dtype=bool)
    for node in nodes:
        if node.kind not in ("input", "const", "compare"):
            v = np.asarray(v64[id(node)], dtype=float)
            inner_bad |= ~np.all(np.isfinite(v.reshape(SCREEN_SAMPLES, -1) if v.ndim else v), axis=-1)
    adj = reverse(nodes, v64) if scalar_root else {}
    with np.errstate(all="ignore"):
        absf = np.abs(f64[:, 0])
        amp = _rounding_terms(nodes, v64, adj, length) / absf if adj else np.zeros(SCREEN_SAMPLES)
        num = _kappa_numerators(nodes, v64, adj, names) if adj else {}
    pred = np.minimum(np.log10(np.maximum(np.nan_to_num(amp, nan=np.inf), 1.0)), total)
    kap = sum(num.values()) / absf if num else np.ones(SCREEN_SAMPLES)
    logk = np.log10(np.maximum(np.nan_to_num(kap, nan=np.inf), 1.0))
    res.predicted = float(np.max(np.where(fin, pred, 0.0)))
    suspicious = bool(np.any(pred[fin] >= th.info - 0.5)) or bool(inner_bad.any()) or (
        res.declared and bool(np.any(logk[fin] >= th.info - 0.5)))
    if not suspicious:
        res.kappa = float(np.max(np.where(fin, kap, 0.0))) if fin.any() else math.nan
        return res
    idx = _subset(pred, logk, inner_bad | ~fin)
    sub = {k: v[idx] for k, v in cols.items()}
    vmp, dps = reference(nodes, sub, deadline)
    with mpmath.workdps(dps):
        exact = vmp[id(root)]
        exact = exact if isinstance(exact, np.ndarray) else np.full((len(idx), 1), exact, dtype=object)
        err = normwise_error(f64[idx], exact)
        ffl = floats(exact)
        absref = np.array([float(abs(row[0])) for row in exact]) if scalar_root else np.ones(len(idx))
    defined = np.array([not any(mpmath.isnan(v) for v in row) for row in exact], dtype=bool)
    normal = defined & np.all(np.isfinite(ffl), axis=-1)
    meas = np.minimum(np.log10(np.maximum(np.nan_to_num(err, nan=0.0, posinf=np.inf) / u, 1.0)), total)
    res.refined, res.measured = True, float(np.max(meas[normal], initial=0.0))
    with np.errstate(all="ignore"):
        kappa = sum(v[idx] for v in num.values()) / absref if num else np.ones(len(idx))
    kappa_i = {k: v[idx] / absref for k, v in num.items()}
    logk_ref = np.log10(np.maximum(np.nan_to_num(kappa, nan=np.inf), 1.0))
    ok = normal & np.isfinite(kappa)
    res.kappa = float(np.max(kappa[ok])) if ok.any() else math.nan
    res.kappa_median = float(np.median(kappa[ok])) if ok.any() else math.nan
    res.kappa_i = {k: float(np.max(v[ok])) if ok.any() else math.nan for k, v in kappa_i.items()}
    errors = _node_errors(nodes, v64, vmp, idx, dps)

    def worst(w: int, category: str, digits: float, fraction: float) -> Analysis:
        res.category, res.digits, res.fraction = category, digits, max(fraction, 1.0 / SCREEN_SAMPLES)
        res.worst_at = _where(sub, w, site)
        res.worst_predicted, res.worst_measured = float(pred[idx][w]), float(meas[w])
        res.worst_kappa = float(kappa[w]) if np.isfinite(kappa[w]) else None
        return res

    # Overflow: the result is not finite, or an intermediate is not and the result is wrong (a sum that
    # overflows makes a softmax 0), where the exact result is an ordinary number.
    nonfinite = normal & (~np.all(np.isfinite(f64[idx]), axis=-1) | inner_bad[idx] & (meas >= th.info))
    if nonfinite.any():
        w = int(np.flatnonzero(nonfinite)[0])
        culprit, what = _first_nonfinite(nodes, v64, int(idx[w]))
        if culprit is not None:
            res.culprit, res.underflow = culprit, what == "underflow"
            return worst(w, "domain" if what == "domain" else "overflow", total, float(np.mean(~fin)))
    valid = normal & np.all(np.isfinite(f64[idx]), axis=-1)
    if not scalar_root or not valid.any():
        return res
    # Avoidable only beyond what the problem's own κ explains (by more than a digit), declared ranges or not:
    # np.var of data with a tiny relative spread loses digits to the rounded mean, as every binary64 two-pass
    # method must, and those digits are within log10 κ; the one-pass form loses far more.
    cand = valid & (meas >= th.info) & (meas > np.minimum(logk_ref, total) + 1.0)
    if cand.any():
        w = int(np.argmax(np.where(cand, meas, -np.inf)))
        _culprit(res, nodes, errors, w, u)
        return worst(w, "formula", float(meas[w]), float(np.mean((pred >= th.info)[fin])) if fin.any() else 0.0)
    if np.any(valid & (logk_ref >= th.info)):
        w = int(np.argmax(np.where(valid, logk_ref, -np.inf)))
        res.culprit = next((i for i, n in enumerate(nodes) if n.kind in REDUCTIONS), None)
        return worst(w, "inherent", float(min(logk_ref[w], total)),
                     float(np.mean((logk >= th.info)[fin])) if fin.any() else 0.0)
    return res


def _is_column(root: Node, nodes: list[Node], arrays: set[str]) -> bool:
    """Whether the root is one number per sample: it depends on arrays only through reductions."""
    memo: dict[int, bool] = {}
    for n in nodes:
        if n.kind == INPUT:
            memo[id(n)] = n.name in arrays
        elif n.kind in REDUCTIONS:
            memo[id(n)] = REDUCTIONS[n.kind].array_result
        else:
            memo[id(n)] = any(memo.get(id(a), False) for a in n.args)
    return not memo[id(root)]


def _kappa_numerators(nodes: list[Node], vals: dict[int, Any], adj: dict[int, Any], names: list[str]
                      ) -> dict[str, np.ndarray]:
    out: dict[str, np.ndarray] = {}
    for n in nodes:
        if n.kind == INPUT and id(n) in adj and not n.is_int:  # integers (lengths, counts) carry no error
            x = np.asarray(vals[id(n)], dtype=float)
            out[n.name] = np.sum(np.abs(x * adj[id(n)]), axis=-1)  # type: ignore[index]
    return out


def _subset(pred: np.ndarray, logk: np.ndarray, bad: np.ndarray) -> np.ndarray:
    n = len(pred)
    picks = list(np.flatnonzero(bad)[:2])
    for s in (pred, logk):
        picks += list(np.argsort(-np.nan_to_num(s, nan=np.inf), kind="stable")[:2])
    picks += list(np.linspace(0, n - 1, REFERENCE_SAMPLES).astype(int))
    chosen = list(dict.fromkeys(int(p) for p in picks))[:REFERENCE_SAMPLES + 2]  # the worst first, then a spread
    return np.array(sorted(chosen))


def _node_errors(nodes: list[Node], v64: dict[int, Any], vmp: dict[int, Any], idx: np.ndarray, dps: int
                 ) -> dict[int, np.ndarray]:
    """Measured normwise relative error of every operation's binary64 value, per reference row."""
    out: dict[int, np.ndarray] = {}
    with mpmath.workdps(dps):
        for k, node in enumerate(nodes):
            if node.kind in ("input", "const", "compare"):
                continue
            a = np.asarray(v64[id(node)], dtype=float)
            e = vmp[id(node)]
            if a.ndim != 2 or not isinstance(e, np.ndarray):
                continue
            out[k] = normwise_error(a[idx], e)
    return out


def _culprit(res: Analysis, nodes: list[Node], errors: dict[int, np.ndarray], w: int, u: float) -> None:
    """The operation whose measured error is largest over its operands' (at least ten times larger)."""
    index = {id(n): i for i, n in enumerate(nodes)}
    best, gain = None, 10.0
    for k, errs in errors.items():
        own = float(np.nan_to_num(errs[w], nan=0.0))
        inc = max([float(np.nan_to_num(errors[index[id(a)]][w], nan=0.0)) for a in nodes[k].args
                   if index[id(a)] in errors] + [u])
        if own / inc >= gain:
            best, gain = k, own / inc
    res.culprit, res.gain = best, gain if best is not None else None
    if best is not None:
        res.sources_of_error = [index[id(a)] for a in nodes[best].args
                                if index[id(a)] in errors and float(np.nan_to_num(errors[index[id(a)]][w])) >= 0.5 * u]


def _first_nonfinite(nodes: list[Node], v64: dict[int, Any], row: int) -> tuple[int | None, str]:
    """Where a non-finite value starts at the row: the first operation that overflows to inf from finite
    operands ("overflow"), else one that underflows to 0 from non-zero operands before a 0/0 ("underflow"),
    else one that gives nan from finite operands ("domain")."""
    def at(node: Node) -> np.ndarray:
        v = np.asarray(v64[id(node)], dtype=float)
        return v[row] if v.ndim == 2 else np.atleast_1d(v)

    ops = [(k, n) for k, n in enumerate(nodes) if n.kind not in ("input", "const", "compare")]
    for want in ("overflow", "underflow", "domain"):
        for k, node in ops:
            v, args = at(node), [at(a) for a in node.args if a.kind != "compare"]
            if not all(np.all(np.isfinite(a)) for a in args):
                continue
            if want == "overflow" and np.any(np.isinf(v)):
                return k, want
            if want == "underflow" and node.kind in ("exp", "mul", "div", "pow", "square") and np.any(
                    (v == 0) & np.all([np.broadcast_to(a, v.shape) != 0 for a in args], axis=0)):
                return k, want
            if want == "domain" and np.any(np.isnan(v)):
                return k, want
    return None, ""


def _where(sub: dict[str, np.ndarray], w: int, site: Site) -> dict[str, float]:
    at: dict[str, float] = {}
    for k, v in sub.items():
        if k in site.arrays:
            at.update(describe_row(k, v[w]))
        else:
            at[k] = float(v[w, 0])
    return at
