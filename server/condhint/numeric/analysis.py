"""Per-site analysis: condition number κ, rounding amplification, measured loss, category.

binary64 is screened on all samples; sites that look suspicious are re-evaluated on a subset of samples in
mpmath (with a precision check), which gives the measured loss and exact κ. Results refer to nodes by
their index in topological order, so they can be cached by structure and reused for equal expressions.
"""
from __future__ import annotations

import math
import zlib
from dataclasses import dataclass, field
from typing import Any

import mpmath
import numpy as np

from condhint.config import Config
from condhint.expr import CONST, INPUT, Node, const_rounds, topological
from condhint.numeric.backends import F64_BACKEND, MP_BACKEND
from condhint.numeric.formats import BINARY64
from condhint.numeric.inputs import ORDINARY, defined_ranges, keep_where_guards_hold, magnitude_guessed
from condhint.numeric.evaluate import Deadline, differentiable, forward, reverse
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.reference import reference_values, relative_error
from condhint.numeric.sampling import sample
from condhint.site import InputRange, Site


@dataclass
class Point:
    """Figures at one sample, for tables and plots."""

    at: dict[str, float]
    kappa: float
    predicted: float
    measured: float | None
    value: float | None


@dataclass
class Analysis:
    names: list[str]
    bounds: dict[str, tuple[float, float]]
    sources: dict[str, str]
    n_samples: int
    refined: bool
    kappa: float  # worst over the valid samples
    kappa_median: float
    kappa_at: dict[str, float]
    kappa_i: dict[str, float]
    predicted: float  # worst predicted digits lost
    measured: float | None  # worst measured digits lost (refined sites only)
    category: str | None = None
    digits: float | None = None  # the figure the severity comes from
    worst_at: dict[str, float] = field(default_factory=dict)
    worst_predicted: float | None = None
    worst_measured: float | None = None
    worst_kappa: float | None = None
    fraction: float | None = None
    culprit: int | None = None  # index of the operation where digits are lost
    sources_of_error: list[int] = field(default_factory=list)  # operands of the culprit carrying error
    dominant: int | None = None  # the rounding that matters most
    gain: float | None = None
    result_uncertainty: float | None = None
    undefined_fraction: float = 0.0
    underflow: bool = False
    declared: bool = False
    assumed: list[str] = field(default_factory=list)  # inputs on the assumed (default) range
    ordinary_digits: float | None = None  # the finding's figure where assumed inputs have ordinary magnitudes
    points: list[Point] = field(default_factory=list)
    note: str = ""


def rounds(node: Node) -> bool:
    if node.kind == CONST:
        return node.exact is not None and node.value is not None and math.isfinite(node.value) and const_rounds(
            node.exact, node.value)
    fn = OPERATIONS.get(node.kind)
    if fn is None or not fn.rounds or node.is_int:
        return False
    if node.kind == "cast":  # a conversion rounds only into a narrower format
        return node.format.narrower_than(node.args[0].format)
    if node.kind in ("mul", "div"):  # scaling by a power of two is exact
        other = node.args[1] if node.kind == "div" else next((a for a in node.args if a.kind == CONST), None)
        if other is not None and other.kind == CONST and other.value and math.isfinite(other.value):
            m, _ = math.frexp(abs(other.value))
            if m == 0.5 and not rounds(other):
                return False
    return True


_FLOATS: dict[int, tuple[Any, np.ndarray]] = {}  # id(array) -> (array, floats), cleared per analysis


def _floats(a: Any) -> np.ndarray:
    """binary64 values of an object array of mpmath numbers (or of a plain scalar)."""
    if not isinstance(a, np.ndarray):
        return np.array([float(a)])
    if a.dtype != object:
        return a.astype(float)
    hit = _FLOATS.get(id(a))
    if hit is not None and hit[0] is a:
        return hit[1]
    out = np.array([float(x) for x in a], dtype=float)
    _FLOATS[id(a)] = (a, out)
    return out


def _safe_div(num: Any, den: Any, backend: Any) -> np.ndarray:
    """|num / den| per sample as binary64 (inf where den is 0)."""
    if backend is not MP_BACKEND:
        with np.errstate(all="ignore"):
            return np.abs(num / den)
    return _mp_ratio([num], den)


def _mp_ratio(factors: list[Any], den: Any) -> np.ndarray:
    """|Π factors / den| for mpmath arrays: in binary64 where that is exact enough, in mpmath where it is not."""
    with np.errstate(all="ignore"):
        num = np.ones(len(den))
        for f in factors:
            num = num * _floats(f)
        d = _floats(den)
        out = np.abs(num / d)
        tiny = 1e-290
        bad = ~np.isfinite(out) | (np.abs(d) < tiny) | (np.abs(num) < tiny) | ~np.isfinite(num) | ~np.isfinite(d)
    for i in np.flatnonzero(bad):
        try:
            x = den[i] if isinstance(den, np.ndarray) else den
            y = 1
            for f in factors:
                y = y * (f[i] if isinstance(f, np.ndarray) else f)
            out[i] = abs(float(y / x)) if x != 0 else math.inf
        except (ZeroDivisionError, OverflowError, ValueError, TypeError):
            out[i] = math.inf
    return out


def _ratio(v: Any, a: Any, f: Any, backend: Any) -> np.ndarray:
    if backend is MP_BACKEND:
        return _mp_ratio([v, a], f)
    with np.errstate(all="ignore"):
        return np.abs(v * a / f)


def metrics(nodes: list[Node], vals: dict[int, Any], adj: dict[int, Any], names: list[str],
             rounding: list[int], backend: Any) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray, dict[int, np.ndarray]]:
    """κ, κᵢ, rounding amplification A and its terms, per sample. A counts in units of the result's own unit
    roundoff: a rounding in another format weighs by the ratio of its unit roundoff to the result's."""
    f = vals[id(nodes[-1])]
    u = nodes[-1].format.unit_roundoff

    def relative(node: Node) -> np.ndarray:  # |v ∂f/∂v / f|
        a = adj.get(id(node))
        return np.zeros(len(f)) if a is None else _ratio(vals[id(node)], a, f, backend)

    by_name = {n.name: n for n in nodes if n.kind == INPUT}
    kappa_i = {name: relative(by_name[name]) for name in names}
    terms = {k: relative(nodes[k]) for k in rounding}
    for k in rounding:
        if nodes[k].format.unit_roundoff != u:
            terms[k] = terms[k] * (nodes[k].format.unit_roundoff / u)
    kappa = sum(kappa_i.values()) if kappa_i else np.zeros(len(f))
    amp = sum(terms.values()) if terms else np.zeros(len(f))
    return np.asarray(kappa, dtype=float), kappa_i, np.asarray(amp, dtype=float), terms


def digits_of(x: np.ndarray, total: float) -> np.ndarray:
    with np.errstate(all="ignore", invalid="ignore"):
        d = np.log10(np.maximum(np.nan_to_num(x, nan=np.inf, posinf=np.inf), 1.0))
    return np.minimum(d, total)


def _subset(scores: list[np.ndarray], n: int, k: int) -> np.ndarray:
    picks: list[int] = [0, n - 1] if n > 1 else [0]
    quota = max(1, k // (2 * len(scores))) if scores else 0
    for s in scores:
        s = np.nan_to_num(s, nan=np.inf)
        picks += list(np.argsort(-s, kind="stable")[:quota])
    rest = k - len(set(picks))
    if rest > 0:
        picks += list(np.linspace(0, n - 1, rest).astype(int))
    return np.array(sorted(set(int(p) for p in picks)))[: max(k, 2)]


def analyse(site: Site, cfg: Config, root: Node | None = None, deadline: Deadline | None = None,
            keep_points: bool = False) -> Analysis:
    """Analyse the site's expression (or one of its subexpressions, `root`) over its input ranges."""
    root = root or site.root
    nodes = topological(root)
    names = sorted({n.name for n in nodes if n.kind == INPUT})  # type: ignore[misc]
    seed = zlib.crc32(root.key().encode())
    ranges = defined_ranges(site, nodes, names, cfg, seed)
    formats = {n.name: n.format for n in nodes if n.kind == INPUT and n.format is not BINARY64}
    cols, bounds = sample(ranges, names, cfg.samples, seed, cfg.default_range, formats)  # type: ignore[arg-type]
    n = len(next(iter(cols.values()))) if cols else 1
    declared = any(r.source != "default" for r in ranges.values())

    cols = keep_where_guards_hold(site, cols)
    n = len(next(iter(cols.values()))) if cols else 1

    rounding = [i for i, node in enumerate(nodes) if rounds(node)]
    try:
        with np.errstate(all="ignore"):
            return _analyse(site, cfg, root, nodes, names, ranges, cols, bounds, n, declared, rounding, deadline,
                            keep_points)
    finally:
        _FLOATS.clear()


def _analyse(site: Site, cfg: Config, root: Node, nodes: list[Node], names: list[str],
             ranges: dict[str, InputRange], cols: dict[str, np.ndarray], bounds: dict[str, tuple[float, float]],
             n: int, declared: bool,
             rounding: list[int], deadline: Deadline | None, keep_points: bool) -> Analysis:
    fmt = root.format  # the format the result computes in: digits are counted in it
    u, total = fmt.unit_roundoff, fmt.digits
    th = cfg.thresholds
    v64 = forward(nodes, cols, F64_BACKEND, n, deadline)
    r64 = np.asarray(v64[id(root)], dtype=float)
    adj64, _ = reverse(nodes, v64, F64_BACKEND, deadline)
    k64, ki64, a64, _ = metrics(nodes, v64, adj64, names, rounding, F64_BACKEND)
    fin64 = np.isfinite(r64)
    inner_bad = np.zeros(n, dtype=bool)
    for node in nodes:
        if differentiable(node):
            v = np.asarray(v64[id(node)], dtype=float)
            if v.dtype == float:
                inner_bad |= ~np.isfinite(v)
    pred64 = digits_of(a64, total)
    logk64 = digits_of(k64, 99.0)
    sources = {k: ranges[k].source for k in names}

    # Re-evaluate in mpmath only what may be reported: a predicted loss, a non-finite value, or (when the user
    # declared ranges, so that sensitivity is reported) a large κ. Everything else keeps its binary64 figures.
    suspicious = bool(np.any(pred64[fin64] >= th.info - 0.5)) or bool(np.any(inner_bad)) or (
        declared and bool(np.any(logk64[fin64] >= th.info - 0.5)))
    base = dict(names=names, bounds=bounds, sources=sources, n_samples=n, declared=declared)
    if not suspicious:
        valid = fin64 & (r64 != 0)
        return _summary(base, cols, valid, k64, ki64, pred64, None, r64, keep_points, refined=False,
                        ranges=ranges)

    # Reference evaluation on a subset: worst predicted, worst κ, non-finite ones, and a spread.
    idx = _subset([pred64, logk64, inner_bad.astype(float) * 99 + (~fin64) * 99], n, cfg.reference_samples)
    sub = {k: v[idx] for k, v in cols.items()}
    m = len(idx)
    r_sub = r64[idx]
    shallow = bool(np.all(np.isfinite(r_sub)) and np.all(r_sub != 0) and np.max(pred64[idx]) < 12
                   and not inner_bad[idx].any())
    vmp, dps = reference_values(nodes, sub, m, deadline, shallow)
    assumed = [k for k in names if magnitude_guessed(ranges[k])]  # a guess, however centred
    ordinary = np.ones(m, dtype=bool)
    for k in assumed:
        mag = np.abs(sub[k])
        ordinary &= (mag >= ORDINARY[0]) & (mag <= ORDINARY[1])
    r = r64[idx]
    with mpmath.workdps(dps):
        fmp = vmp[id(root)]
        ffl = MP_BACKEND.to_float(fmp)
        err = np.array([relative_error(float(a), b) for a, b in zip(r, fmp)], dtype=float)
    defined = np.array([not mpmath.isnan(v) for v in fmp], dtype=bool)
    nonzero = np.array([v != 0 for v in fmp], dtype=bool)
    normal = defined & np.isfinite(ffl) & nonzero & (np.abs(ffl) >= fmt.smallest_normal) & (np.abs(ffl) <= fmt.largest)
    meas = digits_of(err / u, total)
    if _settled(th.info, normal, meas, logk64[fin64], inner_bad[idx] | ~fin64[idx]):
        # The reference shows no reportable loss and binary64 κ is small: no finding is possible; the exact κ
        # (a reverse pass in mpmath, the costliest step) would change no figure by a digit.
        return _summary(base, sub, normal, k64[idx], {k: v[idx] for k, v in ki64.items()}, pred64[idx], meas, r,
                        keep_points, refined=True, ranges=ranges)
    with mpmath.workdps(dps):
        adjmp, partials = reverse(nodes, vmp, MP_BACKEND, deadline)
        kmp, kimp, amp, terms = metrics(nodes, vmp, adjmp, names, rounding, MP_BACKEND)
        steps = _step_conditions(nodes, vmp, partials)
    predmp = digits_of(amp, total)
    logk = digits_of(kmp, 99.0)
    res = _summary(base, sub, normal & np.isfinite(r), kmp, kimp, predmp, meas, r, keep_points, refined=True,
                   ranges=ranges)
    res.undefined_fraction = float(np.mean(~defined)) if m else 0.0
    res.assumed = assumed

    sub64 = {id(node): np.asarray(v64[id(node)], dtype=float)[idx] for node in nodes if differentiable(node)}
    # 1. Overflow / underflow: the true result is ordinary but an intermediate is not.
    bad = normal & np.isinf(r)
    und = normal & (r == 0)
    for kind, mask in (("overflow", bad | und),):
        if mask.any():
            w = int(np.flatnonzero(mask)[0])
            culprit = _first_nonfinite(nodes, sub64, w)
            if culprit is not None:
                res.category, res.digits = kind, total
                res.ordinary_digits = total if (mask & ordinary).any() else 0.0
                res.culprit = culprit
                res.underflow = bool(sub64[id(nodes[culprit])][w] == 0)
                _worst(res, sub, w, predmp, meas, kmp)
                res.fraction = float(np.mean(inner_bad & np.isfinite(k64) | ~fin64)) if n else 0.0
                return res
    # 2. Domain: rounding leaves a function's domain where the exact formula is defined.
    nan64 = normal & np.isnan(r)
    if nan64.any():
        w = int(np.flatnonzero(nan64)[0])
        culprit = _first_nan(nodes, sub64, w)
        over = _first_nonfinite(nodes, sub64, w)
        if culprit is not None and over is not None and any(
                np.isinf(sub64[id(a)][w]) for a in nodes[culprit].args if id(a) in sub64):
            # inf * 0, inf - inf: the nan comes from an overflow earlier, not from leaving a domain
            res.category, res.digits, res.culprit, res.underflow = "overflow", total, over, False
            res.ordinary_digits = total if (nan64 & ordinary).any() else 0.0
            _worst(res, sub, w, predmp, meas, kmp)
            res.fraction = float(np.mean(np.isnan(r64)))
            return res
        res.category, res.digits, res.culprit = "domain", total, culprit
        res.ordinary_digits = total if (nan64 & ordinary).any() else 0.0
        _worst(res, sub, w, predmp, meas, kmp)
        res.fraction = float(np.mean(np.isnan(r64)))
        return res
    if declared and res.undefined_fraction > 0 and defined.any():
        w = int(np.flatnonzero(~defined)[0])
        res.category, res.digits = "domain-range", th.info
        res.culprit = _first_nan(nodes, sub64, w)
        _worst(res, sub, w, predmp, meas, kmp)
        res.fraction = res.undefined_fraction
        return res
    valid = normal & np.isfinite(r)
    if not valid.any():
        return res
    # 3. Formula: with exact inputs the code still loses digits to its own rounding.
    cand = valid & (meas >= th.info)
    if not declared:
        # On guessed ranges a loss that the problem's own κ explains (within a digit) is not called avoidable:
        # there the inputs' errors matter as much (measured on real code: docs/robustness.md).
        cand &= meas > np.minimum(logk, total) + 1.0
    with np.errstate(all="ignore"):
        frac_formula = float(np.mean((pred64 >= th.info)[fin64])) if fin64.any() else 0.0
        frac_kappa = float(np.mean((logk64 >= th.info)[fin64])) if fin64.any() else 0.0
    if cand.any():
        w = int(np.argmax(np.where(cand, meas, -np.inf)))
        res.category, res.digits = "formula", float(meas[w])
        res.ordinary_digits = float(np.max(meas[cand & ordinary], initial=0.0))
        res.fraction = max(frac_formula, 1.0 / n)
        _worst(res, sub, w, predmp, meas, kmp)
        _attribute(res, nodes, steps, terms, rounding, u, w)
    elif np.any(valid & (logk >= th.info) & np.isfinite(kmp)):  # κ undefined (sqrt at 0): no sensitivity figure
        w = int(np.argmax(np.where(valid & np.isfinite(kmp), logk, -np.inf)))
        res.category, res.digits = "inherent", float(min(logk[w], total))
        res.ordinary_digits = float(np.max(np.minimum(logk, total)[valid & ordinary], initial=0.0))
        res.fraction = max(frac_kappa, 1.0 / n)
        _worst(res, sub, w, predmp, meas, kmp)
        _attribute(res, nodes, steps, terms, rounding, u, w)
    return res


def _settled(info: float, normal: np.ndarray, measured: np.ndarray, log_kappa64: np.ndarray,
             nonfinite64: np.ndarray) -> bool:
    """Whether the reference leaves nothing to report: no measured loss reaches `info` (the test the formula
    category makes), and binary64's κ stays a digit below it (its own error is of the order of u times the
    terms, far below a digit, but κ in mpmath is what decides the inherent category)."""
    return bool(normal.all() and not nonfinite64.any() and np.max(measured, initial=0.0) < info
                and np.max(log_kappa64, initial=0.0) < info - 1.0)


def _step_conditions(nodes: list[Node], vals: dict[int, Any], partials: dict[int, tuple[Any, ...]]
                     ) -> dict[int, list[np.ndarray]]:
    """c_kj = |a_j ∂op/∂a_j / op| for each operation k and operand j (as floats)."""
    out: dict[int, list[np.ndarray]] = {}
    for k, node in enumerate(nodes):
        ps = partials.get(id(node))
        if ps is None:
            continue
        v = vals[id(node)]
        cs = []
        for arg, p in zip(node.args, ps):
            a = vals[id(arg)]
            if isinstance(p, float) and p == 0.0:
                cs.append(np.zeros(len(v)))
                continue
            cs.append(_mp_ratio([a, p], v))
        out[k] = cs
    return out


def _attribute(res: Analysis, nodes: list[Node], steps: dict[int, list[np.ndarray]], terms: dict[int, np.ndarray],
               rounding: list[int], u: float, w: int) -> None:
    """Find where digits are lost: the operation whose result carries far more error than its operands."""
    index = {id(n): i for i, n in enumerate(nodes)}
    rset = set(rounding)
    live = _live(nodes, steps, index, w)
    e = [0.0] * len(nodes)
    best, best_gain = None, 1.0
    for k, node in enumerate(nodes):
        own = u if k in rset else 0.0
        if node.kind == CONST or node.kind == INPUT:
            e[k] = own
            continue
        cs = steps.get(k)
        incoming = [e[index[id(a)]] for a in node.args]
        if cs is None:
            e[k] = own + max(incoming, default=0.0)
            continue
        e[k] = own + sum(float(np.nan_to_num(c[w], nan=0.0, posinf=1e300)) * ei for c, ei in zip(cs, incoming))
        gain = e[k] / max(u, max(incoming, default=0.0))
        if gain >= best_gain and k in live:
            best, best_gain = k, gain
    if terms:
        res.dominant = max(terms, key=lambda k: float(np.nan_to_num(terms[k][w], nan=0.0)))
    res.gain = best_gain
    res.culprit = best if best is not None and best_gain >= 10 else (res.dominant if res.category == "formula" else best)
    if res.category == "inherent" and steps:
        # Sensitivity to the inputs lives where an operation's own condition number is largest.
        def step(k: int) -> float:
            return float(sum(np.nan_to_num(c[w], nan=0.0, posinf=1e300) for c in steps[k]))

        res.culprit = max((k for k in steps if k in live), key=step, default=None)
    if res.culprit is not None:
        node = nodes[res.culprit]
        cs = steps.get(res.culprit)
        weights = [float(np.nan_to_num(c[w], nan=0.0, posinf=1e300)) * e[index[id(a)]] for c, a in zip(cs, node.args)] \
            if cs else [e[index[id(a)]] for a in node.args]
        top = max(weights, default=0.0)
        res.sources_of_error = [index[id(a)] for a, wt in zip(node.args, weights)
                                if a.kind != CONST and wt >= 0.1 * top and e[index[id(a)]] >= 0.5 * u]


def _live(nodes: list[Node], steps: dict[int, list[np.ndarray]], index: dict[int, int], w: int) -> set[int]:
    """The operations whose error reaches the result at sample `w`: not in the branch a select leaves unused
    there (`np.where` computes both), nor behind a factor that is zero."""
    live = {len(nodes) - 1}
    for k in range(len(nodes) - 1, -1, -1):
        if k not in live:
            continue
        cs = steps.get(k)
        for j, a in enumerate(nodes[k].args):
            if cs is None or float(np.nan_to_num(cs[j][w], nan=1.0)) != 0.0:
                live.add(index[id(a)])
    return live


def _first_nonfinite(nodes: list[Node], v64: dict[int, np.ndarray], w: int) -> int | None:
    """The first operation that overflows (or, failing that, underflows) from finite non-zero operands."""
    for want_inf in (True, False):
        for k, node in enumerate(nodes):
            v = v64.get(id(node))
            if v is None:
                continue
            args_ok = all(np.isfinite(v64[id(a)][w]) and v64[id(a)][w] != 0 for a in node.args if id(a) in v64)
            hit = np.isinf(v[w]) if want_inf else (v[w] == 0 and node.kind in ("mul", "div", "exp", "pow", "square"))
            if args_ok and hit:
                return k
    return None


def _first_nan(nodes: list[Node], v64: dict[int, np.ndarray], w: int) -> int | None:
    for k, node in enumerate(nodes):
        v = v64.get(id(node))
        if v is not None and np.isnan(v[w]) and all(not np.isnan(v64[id(a)][w]) for a in node.args if id(a) in v64):
            return k
    return None


def _worst(res: Analysis, cols: dict[str, np.ndarray], w: int, pred: np.ndarray, meas: np.ndarray | None,
           kappa: np.ndarray) -> None:
    res.worst_at = {k: float(v[w]) for k, v in cols.items()}
    res.worst_predicted = float(pred[w])
    res.worst_measured = None if meas is None else float(meas[w])
    res.worst_kappa = float(kappa[w])


def _summary(base: dict[str, Any], cols: dict[str, np.ndarray], valid: np.ndarray, kappa: np.ndarray,
             kappa_i: dict[str, np.ndarray], pred: np.ndarray, meas: np.ndarray | None, values: np.ndarray,
             keep_points: bool, refined: bool, ranges: dict[str, InputRange]) -> Analysis:
    kv = np.where(valid, np.nan_to_num(kappa, nan=0.0), -np.inf) if len(kappa) else np.array([0.0])
    w = int(np.argmax(kv)) if valid.any() else 0
    kappa_worst = float(kappa[w]) if valid.any() else math.nan
    res = Analysis(
        **base, refined=refined, kappa=kappa_worst,
        kappa_median=float(np.median(kappa[valid])) if valid.any() else math.nan,
        kappa_at={k: float(v[w]) for k, v in cols.items()} if valid.any() else {},
        kappa_i={k: float(np.max(np.where(valid, v, -np.inf))) if valid.any() else math.nan
                 for k, v in kappa_i.items()},
        predicted=float(np.max(pred[valid])) if valid.any() else 0.0,
        measured=None if meas is None or not valid.any() else float(np.max(meas[valid])),
    )
    unc = [(ranges[k].uncertainty, ranges[k].uncertainty_abs, k) for k in kappa_i
           if ranges[k].uncertainty is not None or ranges[k].uncertainty_abs is not None]
    if unc and valid.any():
        total = np.zeros(len(kappa))
        for rel, ab, k in unc:
            r = rel if rel is not None else np.abs(ab / np.where(cols[k] != 0, cols[k], np.inf))
            total = total + np.nan_to_num(kappa_i[k], nan=0.0) * r
        res.result_uncertainty = float(np.max(total[valid]))
    if keep_points:
        for i in range(len(kappa)):
            res.points.append(Point({k: float(v[i]) for k, v in cols.items()}, float(kappa[i]), float(pred[i]),
                                    None if meas is None else float(meas[i]),
                                    float(values[i]) if np.isfinite(values[i]) else None))
    return res
