"""Loops measured step by step: binary64 (numpy, in the code's order) against mpmath, vectorised over samples.

At most `CAP` steps are evaluated. A longer loop is measured at the cap and the figure is extrapolated to its
trip count with the power law k^p fitted to the error's growth over the measured steps, p capped at 1 (the
linear growth of recursive summation's error bound, Higham 2002); an error growing geometrically (an unstable
recurrence) is extrapolated with its measured factor per step. Every figure is an estimate over sampled inputs,
not a proof.
"""
from __future__ import annotations

import math
import zlib
from fractions import Fraction
from dataclasses import dataclass, field
from typing import Any

import mpmath
import numpy as np

from condhint.config import Config
from condhint.expr import Node, topological
from condhint.numeric.backends import F64_BACKEND, MP, MP_BACKEND
from condhint.numeric.evaluate import Deadline, forward
from condhint.numeric.formats import BINARY64
from condhint.numeric.sampling import points, resolve, sample
from condhint.recurrence import Recurrence
from condhint.site import InputRange, Interval

CAP = 1000  # steps evaluated
SAMPLES = 8  # samples of the inputs (plus the corners of their ranges)
DPS = 50  # mpmath digits; raised when the reference itself cancels more than DPS - 20 digits
_MP_RAW = MP()  # the mpmath backend, taking inputs already converted (carried values keep their precision)
_NO_DIGIT = 0.1  # a relative error from which less than one correct digit is left
_GRID = 256  # points of the grid per-step elements are drawn through
_STEEP = 8.0  # error growing more than this from step k to 2k (k ≥ 4) grows faster than any low power: unstable


@dataclass
class LoopAnalysis:
    """What iterating a loop showed for its worst carried name."""

    name: str
    steps: int  # the trip count the figure refers to
    measured_steps: int  # steps actually evaluated (≤ CAP)
    digits: float  # digits lost at `steps` (extrapolated when steps > measured_steps)
    measured_digits: float  # digits lost after `measured_steps`
    kind: str  # "unstable" (error grows geometrically), "series" (partial values cancel), "accumulation"
    exponent: float | None = None  # fitted growth k^p of the error (accumulation, series)
    factor: float | None = None  # error growth per step (unstable)
    all_lost_at: int | None = None  # the step from which less than one correct digit is left (worst sample)
    cancellation: float = 1.0  # largest |partial value| / |final value| at the worst sample
    worst_at: dict[str, float] = field(default_factory=dict)
    fraction: float = 0.0  # share of samples losing ≥ the info threshold
    declared: bool = True  # no input range is the guessed default
    assumed: list[str] = field(default_factory=list)  # not used by loops: their figures are reported as measured
    ordinary_digits: float | None = None

    @property
    def extrapolated(self) -> bool:
        return self.steps > self.measured_steps


def element_samples(rec: Recurrence, steps: int, n: int, seed: int, default: tuple[float, float]
                    ) -> dict[str, np.ndarray]:
    """The values of each per-step input (`for x in xs`, `xs[i]`) at every step (steps × n), drawn
    independently over the array's element range with the sampling's own spread (log-uniform over decades):
    uniform numbers mapped through the piecewise-linear interpolation of its grid of points."""
    out: dict[str, np.ndarray] = {}
    rng = np.random.default_rng(seed)
    for name in rec.elements:
        lo, hi = resolve(rec.ranges.get(name, InputRange(Interval(), "default")).interval, default)
        grid = points(lo, hi, _GRID + 1)
        draws = rng.random((steps, n)) * _GRID
        out[name] = np.clip(np.interp(draws, np.arange(_GRID + 1), grid), lo, hi)
    return out


def iterate(rec: Recurrence, outer: dict[str, Any], elements: dict[str, np.ndarray], steps: int, backend: Any, n: int,
            checkpoints: list[int], deadline: Deadline | None = None) -> list[tuple[int, dict[str, Any]]]:
    """The carried values after each checkpoint step (and after step 0 = before the loop). `backend` is
    F64_BACKEND or the raw mpmath backend (inputs already mpmath arrays). `elements` holds, per per-step input
    (`for x in xs`, `xs[i]`), its values at each step (steps × n)."""
    init_nodes = _merged([c.initial for c in rec.carried])
    vals = forward(init_nodes, outer, backend, n, deadline)
    state = {c.name: vals[id(c.initial)] for c in rec.carried}
    out = [(0, dict(state))]
    nodes = _merged([c.update for c in rec.carried])
    marks = set(checkpoints)
    mp = backend is not F64_BACKEND
    for k in range(steps):
        if deadline is not None and k % 16 == 15:
            deadline.check()
        inputs = {**outer, **state}
        if rec.counter is not None:
            i = float(rec.start + k * rec.stride)
            inputs[rec.counter] = backend.const(i, str(rec.start + k * rec.stride), n) if mp else np.full(n, i)
        for name, values in elements.items():
            inputs[name] = MP_BACKEND.asarray(values[k]) if mp else values[k]
        vals = forward(nodes, inputs, backend, n)
        state = {c.name: vals[id(c.update)] for c in rec.carried}
        if k + 1 in marks:
            out.append((k + 1, dict(state)))
    return out


def _merged(roots: list[Node]) -> list[Node]:
    seen: set[int] = set()
    out: list[Node] = []
    for r in roots:
        for node in topological(r):
            if id(node) not in seen:
                seen.add(id(node))
                out.append(node)
    return out


def checkpoints_for(steps: int) -> list[int]:
    """Steps 1, 2, 4, … and every step up to 64 (errors of unstable recurrences change fast), and the last."""
    marks = set(range(1, min(steps, 64) + 1))
    k = 64
    while k < steps:
        marks.add(k)
        k *= 2
    marks.add(steps)
    return sorted(m for m in marks if m >= 1)


def analyse_loop(rec: Recurrence, cfg: Config, deadline: Deadline | None = None, only: str | None = None
                 ) -> LoopAnalysis | None:
    """Iterate the loop over samples in binary64 and in mpmath; None when no float name carries a value.
    `only`: measure that carried name, recurrent or not (a fix computing it directly is judged this way)."""
    floats = [c for c in rec.carried if not c.is_int and (rec.recurrent(c) if only is None else c.name == only)]
    if not floats or rec.trips < 1:
        return None
    ranges, cols, n, steps, elements = _samples(rec, cfg)
    marks = checkpoints_for(steps)
    with np.errstate(all="ignore"):
        run64 = iterate(rec, cols, elements, steps, F64_BACKEND, n, marks, deadline)
    dps = DPS
    while True:
        with mpmath.workdps(dps):
            outer = {k: MP_BACKEND.asarray(v) for k, v in cols.items()}
            done = {k for k, _ in run64}
            runmp = iterate(rec, outer, elements, max(done), _MP_RAW, n, sorted(done), deadline)
            err, norm, peak = _errors(run64, runmp, floats, n)
        need = max((float(np.max(np.log10(np.maximum(np.nan_to_num(p, nan=1.0), 1e-300)))) for p in peak.values()),
                   default=0.0)
        if need <= dps - 20 or dps >= 400:
            break
        dps = min(400, int(need) + 40)
    return _summarise(rec, cfg, floats, [k for k, _ in run64], err, norm, peak, cols, ranges)


def _samples(rec: Recurrence, cfg: Config) -> tuple[dict[str, InputRange], dict[str, np.ndarray], int, int,
                                                    dict[str, np.ndarray]]:
    """The ranges and samples of the outer inputs, the sample count, the steps evaluated and the per-step
    elements: the same for a loop and for every fix judged against it."""
    names = rec.outer_inputs()
    ranges = {k: rec.ranges.get(k) or InputRange(Interval(), "default") for k in names}
    seed = zlib.crc32(rec.key().encode())
    cols, _ = sample(ranges, names, SAMPLES, seed, cfg.default_range) if names else ({}, {})
    n = len(next(iter(cols.values()))) if cols else (SAMPLES if rec.elements else 1)
    steps = min(rec.trips, CAP)
    return ranges, cols, n, steps, element_samples(rec, steps, n, seed, cfg.default_range)


def fsum_digits(rec: Recurrence, cfg: Config, element: str) -> float:
    """Worst digits lost by `math.fsum` of one per-step element over the loop's own samples (exact sums by
    `fractions.Fraction`); fsum is correctly rounded (Shewchuk), so this holds for any length."""
    _, _, n, _, elements = _samples(rec, cfg)
    worst = 0.0
    for j in range(n):
        terms = [float(v) for v in elements[element][:, j]]
        exact = sum((Fraction(t) for t in terms), Fraction(0))
        if exact != 0:
            err = float(abs(Fraction(math.fsum(terms)) - exact) / abs(exact))
            worst = max(worst, math.log10(max(err, BINARY64.unit_roundoff) / BINARY64.unit_roundoff))
    return worst


def _errors(run64: list[tuple[int, dict[str, Any]]], runmp: list[tuple[int, dict[str, Any]]], floats: list[Any],
            n: int) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Per name, per checkpoint and sample: the relative error, the error relative to the largest exact value
    so far, and the largest exact value over the final one (how much the partial values cancel)."""
    err, norm, peak = {}, {}, {}
    for c in floats:
        e = np.full((len(runmp), n), np.nan)
        z = np.full((len(runmp), n), np.nan)
        top = [mpmath.mpf(0)] * n
        for row, ((_, s64), (_, smp)) in enumerate(zip(run64, runmp)):
            a, b = np.broadcast_to(np.asarray(s64[c.name], dtype=float), (n,)), smp[c.name]
            for j in range(n):
                exact = b[j] if isinstance(b, np.ndarray) else b
                if not mpmath.isfinite(exact):
                    continue
                top[j] = max(top[j], abs(exact))
                if not math.isfinite(a[j]):
                    e[row, j] = z[row, j] = math.inf
                    continue
                diff = abs(mpmath.mpf(float(a[j])) - exact)
                if exact != 0:
                    e[row, j] = float(diff / abs(exact))
                if top[j] != 0:
                    z[row, j] = float(diff / top[j])
        final = runmp[-1][1][c.name]
        peak[c.name] = np.array([float(top[j] / abs(final[j])) if isinstance(final, np.ndarray) and final[j] != 0
                                 and mpmath.isfinite(final[j]) else math.nan for j in range(n)])
        err[c.name], norm[c.name] = e, z
    return err, norm, peak


def _summarise(rec: Recurrence, cfg: Config, floats: list[Any], marks: list[int], err: dict[str, np.ndarray],
               norm: dict[str, np.ndarray], peak: dict[str, np.ndarray], cols: dict[str, np.ndarray],
               ranges: dict[str, InputRange]) -> LoopAnalysis | None:
    u, total = BINARY64.unit_roundoff, BINARY64.digits
    best: LoopAnalysis | None = None
    with np.errstate(all="ignore"):
        for c in floats:
            # Past the step where every digit is lost, the figures (and the reference's own growing error,
            # for an unstable recurrence) say nothing more: the curve ends there.
            gone = np.flatnonzero(np.max(np.nan_to_num(norm[c.name], nan=0.0), axis=1) >= 1.0)
            rows = int(gone[0]) + 1 if len(gone) else len(marks)
            steps_done = marks[:rows]
            final = err[c.name][rows - 1]
            digits = np.minimum(np.log10(np.maximum(np.nan_to_num(final, nan=u), u) / u), total)
            if not np.isfinite(digits).any():
                continue
            w = int(np.nanargmax(digits))
            measured = float(digits[w])
            a = LoopAnalysis(c.name, rec.trips, steps_done[-1], measured, measured, "accumulation",
                             worst_at={k: float(v[w]) for k, v in cols.items()},
                             declared=all(r.source != "default" for r in ranges.values()) and all(
                                 rec.ranges[e].source != "default" for e in rec.elements if e in rec.ranges))
            curve = norm[c.name][:rows, w]
            a.factor = _geometric(steps_done, curve, u)
            lost = np.flatnonzero(np.nan_to_num(err[c.name][:rows, w], nan=0.0) >= _NO_DIGIT)
            a.all_lost_at = steps_done[int(lost[0])] if len(lost) else None
            if a.all_lost_at is not None:
                a.digits = a.measured_digits = total
            ratio = float(peak[c.name][w])
            a.cancellation = ratio if math.isfinite(ratio) else 1.0
            if a.factor is not None:
                a.kind = "unstable"
                if a.extrapolated and a.all_lost_at is None:
                    grow = (rec.trips - a.measured_steps) * math.log10(a.factor)
                    a.digits = min(total, measured + grow)
            else:
                a.kind = "series" if a.cancellation >= 10 ** cfg.thresholds.info else "accumulation"
                a.exponent = _power(steps_done, err[c.name][:rows, w], u)
                if a.extrapolated and a.exponent is not None:
                    digits = np.minimum(total, digits + a.exponent * math.log10(rec.trips / a.measured_steps))
                    a.digits = float(digits[w])
            a.fraction = float(np.mean(np.nan_to_num(digits, nan=0.0) >= cfg.thresholds.info))
            if best is None or a.digits > best.digits:
                best = a
    return best


def _geometric(steps: list[int], curve: np.ndarray, u: float) -> float | None:
    """The error's growth factor per step when it grows geometrically (faster than k³ from k to 2k, k ≥ 4,
    before it saturates), else None. The curve is the error relative to the largest exact value so far, so a
    value passing near zero does not look like growth."""
    at = {k: float(v) for k, v in zip(steps, curve) if math.isfinite(v)}
    best = None
    for k in steps:
        if k < 4 or 2 * k not in at or k not in at:
            continue
        e1, e2 = max(at[k], u / 4), at[2 * k]
        if e2 >= 0.1 or e2 < 1e3 * u:
            continue
        if e2 / e1 >= _STEEP:
            best = (e2 / e1) ** (1.0 / k)
    return best


def _power(steps: list[int], errors: np.ndarray, u: float) -> float | None:
    """The exponent p of error ∝ k^p fitted over the second half (in log k) of the measured steps, in [0, 1].
    The error's running maximum is fitted: rounding errors that happen to cancel at one step come back later."""
    envelope = np.fmax.accumulate(np.nan_to_num(errors, nan=0.0, posinf=np.inf))
    pts = [(math.log(k), math.log(max(float(e), u))) for k, e in zip(steps, envelope) if k >= 1 and math.isfinite(e)]
    if len(pts) < 3 or steps[-1] < 8:
        return None
    half = [p for p in pts if p[0] >= pts[-1][0] / 2]
    if len(half) < 2:
        return None
    x = np.array([p[0] for p in half])
    y = np.array([p[1] for p in half])
    slope = float(np.polyfit(x, y, 1)[0]) if np.ptp(x) > 0 else 0.0
    return min(max(slope, 0.0), 1.0)
