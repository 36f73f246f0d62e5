"""Verification of a candidate rewrite (design §3): equivalent on the domain, and measured more accurate.

Original and candidate are evaluated on the same samples of the site's input ranges (those the analysis
uses, plus edge values): binary64 as the code runs, mpmath at a precision checked to be enough as the
truth. A candidate passes when

- its exact value equals the original's at every checked point where the original is defined (to 1e-20
  relative; series approximations to half the unit roundoff), and sympy proves the identity when
  it can within its time budget;
- its worst measured loss is at least `MIN_GAIN` digits below the original's, and at no checked point is
  it worse than the original by more than `MAX_WORSE` digits (losses below `NOISE` digits count as
  `NOISE`: a few ulps either way are not a difference).
"""
from __future__ import annotations

import math
import zlib
from dataclasses import dataclass
from typing import Any

import mpmath
import numpy as np

from condhint.budget import OverBudget
from condhint.config import Config
from condhint.expr import INPUT, SELECT, Node, topological
from condhint.numeric.analysis import digits_of, metrics, rounds
from condhint.numeric.inputs import defined_ranges, keep_where_guards_hold
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import BudgetExceeded, Deadline, forward, reverse
from condhint.numeric.formats import Format
from condhint.numeric.operations import SATURATED
from condhint.numeric.reference import ZERO_SETTLED, reference_values
from condhint.numeric.sampling import sample
from condhint.once import once_with_budget
from condhint.rewrites import sym
from condhint.site import Site

MIN_GAIN = 1.0
MAX_WORSE = 0.25
NOISE = 0.5
EXACT_TOLERANCE = 1e-20


@dataclass
class Evidence:
    """What the measurement showed for one candidate."""

    ok: bool
    before: float = 0.0  # worst measured digits lost by the original on the checked points
    after: float = 0.0  # worst measured digits lost by the candidate
    worse_by: float = 0.0  # largest excess of the candidate's loss over the original's at one point
    points: int = 0
    proven: bool = False
    reason: str = ""


class Bench:
    """The samples of one site and the original's figures, shared by all candidates for its findings."""

    def __init__(self, site: Site, cfg: Config, worst_at: dict[str, float] | None = None) -> None:
        self.site = site
        self.cfg = cfg
        self.format = site.float_format
        self.u, self.total = self.format.unit_roundoff, self.format.digits
        root = site.root
        self.names = sorted({n.name for n in topological(root) if n.kind == INPUT})  # type: ignore[misc]
        seed = zlib.crc32(root.key().encode())
        ranges = self.ranges = defined_ranges(site, topological(root), self.names, cfg, seed)
        formats = {n.name: n.format for n in topological(root) if n.kind == INPUT}
        cols, self.bounds = sample(ranges, self.names, cfg.samples, zlib.crc32(root.key().encode()),
                                   cfg.default_range, formats)  # type: ignore[arg-type]
        cols = _with_edges(cols, self.bounds, worst_at or {})
        cols = keep_where_guards_hold(site, cols)
        self.cols, self.n = cols, len(next(iter(cols.values()))) if cols else 1
        self._signs: dict[str, int] = {}
        self._refs: dict[str, dict[int, Any]] = {}
        self.orig64, self.orig_pred = self.screen(root)

    # ---- binary64 ---------------------------------------------------------------------------------------------
    def values(self, node: Node) -> np.ndarray:
        with np.errstate(all="ignore"):
            v = forward(topological(node), self.cols, F64_BACKEND, self.n)[id(node)]
        return np.asarray(v, dtype=float) if np.ndim(v) else np.full(self.n, float(v))

    def screen(self, root: Node) -> tuple[np.ndarray, np.ndarray]:
        """binary64 values and predicted digits lost (rounding amplification) at every sample."""
        nodes = topological(root)
        with np.errstate(all="ignore"):
            vals = forward(nodes, self.cols, F64_BACKEND, self.n)
            adj, _ = reverse(nodes, vals, F64_BACKEND)
            rounding = [i for i, node in enumerate(nodes) if rounds(node)]
            names = sorted({n.name for n in nodes if n.kind == INPUT})  # type: ignore[misc]
            _, _, amp, _ = metrics(nodes, vals, adj, names, rounding, F64_BACKEND)
        v = np.asarray(vals[id(root)], dtype=float)
        return v, digits_of(np.asarray(amp, dtype=float), self.total)

    def sign(self, node: Node) -> int:
        """+1 or -1 when the node has that sign at every sample where it is defined, else 0."""
        key = node.key()
        if key not in self._signs:
            v = self.values(node)
            v = v[~np.isnan(v)]
            self._signs[key] = 0 if not len(v) else (1 if np.all(v > 0) else -1 if np.all(v < 0) else 0)
        return self._signs[key]

    def branches_finite(self, candidate: Node) -> bool:
        """Whether both branches of every choice the candidate adds are finite wherever the original is: numpy's
        `where` evaluates both, so a branch that is not taken must not overflow or divide by zero either (on
        Python floats it would raise; on arrays it would warn). The code's own choices stay as they are."""
        finite = np.isfinite(self.orig64)
        own = {id(n) for n in topological(self.site.root)}
        for n in topological(candidate):
            if n.kind == SELECT and id(n) not in own and any(
                    np.any(finite & ~np.isfinite(self.values(b))) for b in n.args[1:]):
                return False
        return True

    def nonneg(self, node: Node) -> bool:
        v = self.values(node)
        v = v[~np.isnan(v)]
        return bool(len(v)) and bool(np.all(v >= 0))

    # ---- reference ----------------------------------------------------------------------------------------------
    def reference(self, root: Node, idx: np.ndarray, deadline: Deadline | None) -> list[Any]:
        """mpmath values of `root` at the samples `idx` (memoised per point)."""
        memo = self._refs.setdefault(root.key(), {})
        missing = np.array([i for i in idx if int(i) not in memo], dtype=int)
        if len(missing):
            nodes = topological(root)
            sub = {k: v[missing] for k, v in self.cols.items()}
            vals, dps = reference_values(nodes, sub, len(missing), deadline, zeros_settle=ZERO_SETTLED)
            for i, value in zip(missing, vals[id(root)]):
                memo[int(i)] = (value, dps)
        return [memo[int(i)] for i in idx]

    def checkpoints(self, cand64: np.ndarray, cand_pred: np.ndarray) -> np.ndarray:
        """The samples to check in mpmath: where either formula is predicted worst, where the two binary64
        results differ most or are not finite, a spread over the range, and the edge values."""
        n, quota = self.n, 14
        with np.errstate(all="ignore"):
            scale = np.maximum(np.abs(self.orig64), np.abs(cand64))
            diff = np.abs(self.orig64 - cand64) / np.where(scale > 0, scale, 1.0)
        scores = [self.orig_pred, cand_pred, np.nan_to_num(diff, nan=np.inf),
                  (~np.isfinite(self.orig64)).astype(float) + (~np.isfinite(cand64)).astype(float)]
        picks: set[int] = set(range(max(0, n - self.edges), n)) | {0}
        for s in scores:
            order = np.argsort(-np.nan_to_num(s, nan=np.inf), kind="stable")
            picks.update(int(i) for i in order[:quota] if s[i] > 0 or s is scores[0])
        picks.update(int(i) for i in np.linspace(0, n - 1, min(n, 16)).astype(int))
        return np.array(sorted(picks), dtype=int)

    @property
    def edges(self) -> int:
        return 2 * len(self.names)

    # ---- the verdict --------------------------------------------------------------------------------------------
    def judge(self, target: Node, replacement: Node, candidate_root: Node, approximate: bool,
              deadline: Deadline | None, proof_seconds: float = 0.5) -> Evidence:
        cand64, cand_pred = self.screen(candidate_root)
        idx = self.checkpoints(cand64, cand_pred)
        try:
            ref = self.reference(self.site.root, idx, deadline)
            cref = self.reference(candidate_root, idx, deadline)
        except BudgetExceeded:
            return Evidence(False, reason="over the time budget")
        tol = self.u / 2 if approximate else EXACT_TOLERANCE
        before, after, worse = [], [], 0.0
        for k, i in enumerate(idx):
            (r, dps), (c, _) = ref[k], cref[k]
            with mpmath.workdps(dps):
                if mpmath.isnan(r):
                    continue  # undefined for the original: the candidate may extend it
                if not _agree(r, c, tol):
                    return Evidence(False, reason=f"not equivalent at {self.at(int(i))}")
                if not _ordinary(r, self.format):
                    continue  # no formula in this format can return the true value there
                d0 = self._lost(float(self.orig64[i]), r)
                d1 = self._lost(float(cand64[i]), r)
            before.append(d0)
            after.append(d1)
            worse = max(worse, max(d1, NOISE) - max(d0, NOISE))
        if not before:
            return Evidence(False, reason="no point where the original is defined")
        ev = Evidence(False, max(before), max(after), worse, len(before))
        if ev.after > ev.before - MIN_GAIN:
            ev.reason = f"not accurate enough: {ev.after:.1f} digits lost instead of {ev.before:.1f}"
            return ev
        if worse > MAX_WORSE:
            ev.reason = f"worse than the original by {worse:.2f} digits somewhere"
            return ev
        unsure = self.unsigned_disagreement(candidate_root, idx, tol, deadline)
        if unsure is not None:
            ev.reason = unsure
            return ev
        ev.ok = True
        if not approximate:
            ev.proven = prove(target, replacement, self, proof_seconds)
        return ev

    def unsigned_disagreement(self, candidate_root: Node, idx: np.ndarray, tol: float,
                              deadline: Deadline | None) -> str | None:
        """Why the candidate is not equivalent at the other sign of inputs whose sign the code does not fix
        (their range is assumed, or bounded above only, and sampled positive), or at zero, or None. The code may
        see either sign there."""
        free = [k for k in self.names if (self.ranges[k].source == "default" or self.ranges[k].interval.low < 0)
                and not self.ranges[k].is_int and bool(np.all(self.cols[k] >= 0))]
        if not free:
            return None
        pts = idx[:: max(1, len(idx) // 8)][:8]
        flips = [set(free)] + ([{k} for k in free] if 1 < len(free) <= 3 else [])
        for flip in flips:
            cols = {k: (-v[pts] if k in flip else v[pts]) for k, v in self.cols.items()}
            try:
                orig, dps = reference_values(topological(self.site.root), cols, len(pts), deadline,
                                             zeros_settle=ZERO_SETTLED)
                cand, _ = reference_values(topological(candidate_root), cols, len(pts), deadline,
                                           zeros_settle=ZERO_SETTLED)
            except BudgetExceeded:
                return "not checked at negative inputs within the time budget"
            names = ", ".join(sorted(flip))
            with np.errstate(all="ignore"):
                o64 = forward(topological(self.site.root), cols, F64_BACKEND, len(pts))[id(self.site.root)]
                c64 = forward(topological(candidate_root), cols, F64_BACKEND, len(pts))[id(candidate_root)]
            with mpmath.workdps(dps):
                for r, c, a, b in zip(orig[id(self.site.root)], cand[id(candidate_root)], o64, c64):
                    if mpmath.isnan(r):
                        continue
                    if not _agree(r, c, tol):
                        return f"equivalent only where {names} > 0, which the code does not establish"
                    if _ordinary(r, self.format) and \
                            max(self._lost(float(b), r), NOISE) - max(self._lost(float(a), r), NOISE) > MAX_WORSE:
                        return f"less accurate than the original where {names} < 0, which the code allows"
        for k in free:  # zero, which the code does not exclude either: a finite result must stay finite
            cols = {n: (np.zeros(len(pts)) if n == k else v[pts]) for n, v in self.cols.items()}
            with np.errstate(all="ignore"):
                o64 = forward(topological(self.site.root), cols, F64_BACKEND, len(pts))[id(self.site.root)]
                c64 = forward(topological(candidate_root), cols, F64_BACKEND, len(pts))[id(candidate_root)]
            if np.any(np.isfinite(o64) & ~np.isfinite(c64)):
                return f"gives inf or nan where {k} = 0, which the code allows, while the original stays finite"
        return None

    def _lost(self, approx: float, exact: Any) -> float:
        if not math.isfinite(approx):
            return self.total
        err = abs((mpmath.mpf(approx) - exact) / exact)
        return float(digits_of(np.array([float(err) / self.u]), self.total)[0])

    def at(self, i: int) -> str:
        return ", ".join(f"{k} = {v[i]:.6g}" for k, v in self.cols.items())


def _ordinary(r: Any, fmt: Format) -> bool:
    """A true value the format can represent as a normal number."""
    return not mpmath.isinf(r) and r != 0 and fmt.smallest_normal <= abs(r) <= fmt.largest


def _agree(a: Any, b: Any, tol: float) -> bool:
    if mpmath.isnan(b):
        return False
    if mpmath.isinf(a) and not mpmath.isinf(b):  # the reference saturates a power beyond every format's range
        return abs(b) > SATURATED and (a > 0) == (b > 0)
    if mpmath.isinf(a) or mpmath.isinf(b):
        return a == b
    tiny = mpmath.mpf(10) ** -300  # below binary64's normal range: no difference there can be seen in the code
    if abs(a) < tiny and abs(b) < tiny:
        return True
    return a != 0 and abs((a - b) / a) <= tol


def _with_edges(cols: dict[str, np.ndarray], bounds: dict[str, tuple[float, float]], at: dict[str, float]
                ) -> dict[str, np.ndarray]:
    """Append, for each input, a point at each end of its range (other inputs at the finding's worst point)."""
    if not cols:
        return cols
    extra: dict[str, list[float]] = {k: [] for k in cols}
    mid = {k: at.get(k, float(v[len(v) // 2])) for k, v in cols.items()}
    for name in cols:
        for end in bounds[name]:
            for k in cols:
                extra[k].append(end if k == name else mid[k])
    return {k: np.concatenate([v, np.array(extra[k], dtype=float)]) for k, v in cols.items()}


def prove(target: Node, replacement: Node, bench: Bench, seconds: float) -> bool:
    """sympy shows target − replacement ≡ 0 (inputs positive where their range is), within `seconds`."""
    positive = {n for n in bench.names if bench.bounds[n][0] > 0}
    pos = lambda node: node.kind == INPUT and node.name in positive  # noqa: E731
    try:
        a = sym.to_sympy(target, positive=pos, exact_forms=True).expr
        b = sym.to_sympy(replacement, positive=pos, exact_forms=True).expr
        return bool(once_with_budget(sym.is_zero, (a - b,), seconds))
    except (OverBudget, RuntimeError, ValueError, TypeError, RecursionError, ZeroDivisionError, AttributeError):
        return False
