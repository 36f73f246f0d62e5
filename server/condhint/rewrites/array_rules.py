"""Verified fixes for array code: named rules over reductions, each checked on the site's own sampled arrays.

Rules (each a `ArrayRule`: id, title, a matcher that gives the node to replace, the candidate DAG and its text):
- `two-pass-variance`: mean(x²) − mean(x)² (also sums over the length) -> `np.var(x)`;
- `two-pass-covariance`: mean(x·y) − mean(x)·mean(y) -> `np.mean((x - np.mean(x)) * (y - np.mean(y)))`;
- `shifted-softmax`: exp(z) / sum(exp(z)) -> exp(z − max z) (the shift cancels in the ratio);
- `shifted-log-sum-exp`: log(sum(exp(z))) -> max z + log(sum(exp(z − max z)));
- `scaled-norm`: sqrt(sum(x²)), sqrt(x·x), `np.linalg.norm(x)` of a declared vector -> `math.hypot(*x)`
  (numpy's norm computes sqrt(x·x) and overflows too: numpy's source);
- `difference-distance`: sum(x²) + sum(y²) − 2·x·y -> `np.sum((x - y) ** 2)`.
A candidate is kept only when, on the site's sampled arrays, its exact value (mpmath) equals the original's
wherever either is defined, it is measured at least one digit better at the worst sample and nowhere a
quarter digit worse, and the patched file re-analyses without the finding (`recheck.rechecked`).
"""
from __future__ import annotations

import ast
import re
import zlib
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

import mpmath
import numpy as np

from condhint.config import Config
from condhint.expr import CONST, INPUT, Node, Span, topological
from condhint.findings import Fix
from condhint.numeric.array_analysis import sample_inputs
from condhint.numeric.array_values import forward, mp_difference, normwise_error, reference
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.numeric.formats import BINARY64
from condhint.rewrites import codegen
from condhint.rewrites.dag import difference, same, square_of, substitute
from condhint.rewrites.recheck import rechecked
from condhint.rewrites.verify import MAX_WORSE, NOISE
from condhint.site import Site

if TYPE_CHECKING:
    from condhint.rewrites.propose import Subject

_PLAIN = re.compile(r"[A-Za-z_][A-Za-z_0-9]*(\.[A-Za-z_][A-Za-z_0-9]*)*")  # a name: safe to repeat


@dataclass(frozen=True)
class Candidate:
    target: Node  # the node whose source range is replaced
    replacement: Node  # what computes in its place (the DAG verified)
    text: Callable[["Spell"], str]  # its code in the file's spelling


@dataclass(frozen=True)
class ArrayRule:
    id: str
    title: str
    match: Callable[[Node, Site], Candidate | None]


class Spell:
    """The file's spelling of numpy and math (`np`, `math`), with the imports a fix would need."""

    def __init__(self, tree: ast.Module) -> None:
        self.style = codegen.Style.of(tree)
        self.imports: list[str] = []

    def module(self, name: str, default: str) -> str:
        alias = self.style.aliases.get(name)
        if alias is None:
            self.imports.append(f"import {name}" if name == default else f"import {name} as {default}")
            return default
        return alias

    @property
    def np(self) -> str:
        return self.module("numpy", "np")

    @property
    def math(self) -> str:
        return self.module("math", "math")


def _plain(node: Node) -> bool:
    return node.kind == INPUT and not node.is_int and bool(_PLAIN.fullmatch(node.text or ""))


def _mean_of(node: Node) -> Node | None:
    """a for mean(a), or sum(a) / len(x) where x is an array a is computed from."""
    if node.kind == "mean":
        return node.args[0]
    if node.kind == "div" and node.args[0].kind == "sum" and node.args[1].kind == INPUT:
        a, n = node.args[0].args[0], node.args[1].name or ""
        names = {t.name for t in topological(a) if t.kind == INPUT}
        if any(n in (f"len({k})", f"{k}.size", f"{k}.shape[0]") for k in names):
            return a
    return None


def _raw_variance(node: Node, site: Site) -> Candidate | None:
    d = _difference(node)
    if d is None:
        return None
    a, b = d
    ma, mb = _mean_of(a), square_of(b)
    x = square_of(ma) if ma is not None else None
    inner = _mean_of(mb) if mb is not None else None
    if x is None or inner is None or not same(x, inner) or not _plain(x):
        return None
    return Candidate(node, Node("var", (x,)), lambda s: f"{s.np}.var({x.text})")


def _difference(node: Node, left: str | None = None, right: str | None = None) -> tuple[Node, Node] | None:
    """(a, b) when node computes a − b, with a and b of the given kinds (when given)."""
    d = difference(node)
    if d is None or (left is not None and d[0].kind != left) or (right is not None and d[1].kind != right):
        return None
    return d


def _raw_covariance(node: Node, site: Site) -> Candidate | None:
    d = _difference(node, right="mul")
    if d is None:
        return None
    a, b = d
    prod = _mean_of(a)
    mx, my = (_mean_of(t) for t in b.args)
    if prod is None or prod.kind != "mul" or mx is None or my is None or same(mx, my):
        return None
    p, q = prod.args
    if not ((same(p, mx) and same(q, my)) or (same(p, my) and same(q, mx))) or not (_plain(mx) and _plain(my)):
        return None
    x, y = mx, my
    centred = Node("mul", (Node("sub", (x, Node("mean", (x,)))), Node("sub", (y, Node("mean", (y,))))))
    return Candidate(node, Node("mean", (centred,)),
                     lambda s: f"{s.np}.mean(({x.text} - {s.np}.mean({x.text})) * ({y.text} - {s.np}.mean({y.text})))")


def _shifted(z: Node) -> Node:
    return Node("exp", (Node("sub", (z, Node("amax", (z,)))),))


def _softmax(node: Node, site: Site) -> Candidate | None:
    if node.kind != "div" or node.args[1].kind != "sum":
        return None
    e, s = node.args[0], node.args[1].args[0]
    if e.kind != "exp" or not same(e, s) or not _plain(e.args[0]):
        return None
    z = e.args[0]
    if e is s and e.span is not None and node.span is not None and not node.span.contains(e.span):
        # `e = np.exp(z)` on a line of its own: shift it there, when the ratio is its only use
        return Candidate(e, _shifted(z), lambda sp: f"{sp.np}.exp({z.text} - {sp.np}.max({z.text}))")
    if node.span is None or e.span is None or not node.span.contains(e.span):
        return None
    t = _shifted(z)
    return Candidate(node, Node("div", (t, Node("sum", (t,)))), lambda sp: (
        f"{sp.np}.exp({z.text} - {sp.np}.max({z.text})) / {sp.np}.sum({sp.np}.exp({z.text} - {sp.np}.max({z.text})))"))


def _log_sum_exp(node: Node, site: Site) -> Candidate | None:
    if node.kind != "log" or node.args[0].kind != "sum" or node.args[0].args[0].kind != "exp":
        return None
    e = node.args[0].args[0]
    z = e.args[0]
    if not _plain(z) or node.span is None or e.span is None or not node.span.contains(e.span):
        return None
    m = Node("amax", (z,))
    cand = Node("add", (m, Node("log", (Node("sum", (_shifted(z),)),))))
    return Candidate(node, cand, lambda s: (
        f"{s.np}.max({z.text}) + {s.np}.log({s.np}.sum({s.np}.exp({z.text} - {s.np}.max({z.text}))))"))


def _sum_of_squares(node: Node) -> Node | None:
    """x for sum(x²) or x·x."""
    if node.kind == "sum":
        return square_of(node.args[0])
    if node.kind == "dot" and same(node.args[0], node.args[1]):
        return node.args[0]
    return None


def _norm(node: Node, site: Site) -> Candidate | None:
    if node.kind == "norm":
        x = node.args[0]
    elif node.kind == "sqrt":
        x = _sum_of_squares(node.args[0])
    else:
        return None
    if x is None or not _plain(x) or site.arrays.get(x.name or "") is None:
        return None  # `math.hypot(*x)` takes a vector: only for arrays with a declared length
    return Candidate(node, Node("hypot_all", (x,)), lambda s: f"{s.math}.hypot(*{x.text})")


def _cross(node: Node) -> tuple[Node, Node] | None:
    """(x, y) for 2·x·y written as 2 * dot(x, y), 2 * sum(x * y) or dot(x, y) * 2."""
    if node.kind != "mul":
        return None
    c, t = node.args if node.args[0].kind == CONST else node.args[::-1]
    if c.kind != CONST or c.value != 2.0:
        return None
    if t.kind == "dot":
        return t.args[0], t.args[1]
    if t.kind == "sum" and t.args[0].kind == "mul":
        return t.args[0].args[0], t.args[0].args[1]
    return None


def _distance(node: Node, site: Site) -> Candidate | None:
    d = _difference(node, left="add")
    pair = _cross(d[1]) if d is not None else None
    xs = [_sum_of_squares(t) for t in d[0].args] if d is not None else []
    if pair is None or any(x is None for x in xs) or not all(_plain(x) for x in pair):  # type: ignore[arg-type]
        return None
    x, y = pair
    if not ((same(xs[0], x) and same(xs[1], y)) or (same(xs[0], y) and same(xs[1], x))):  # type: ignore[arg-type]
        return None
    diff = Node("sub", (x, y))
    return Candidate(node, Node("sum", (Node("mul", (diff, diff)),)),
                     lambda s: f"{s.np}.sum(({x.text} - {y.text}) ** 2)")


RULES: tuple[ArrayRule, ...] = (
    ArrayRule("two-pass-variance", "Compute the variance in two passes (np.var)", _raw_variance),
    ArrayRule("two-pass-covariance", "Compute the covariance in two passes (centre first)", _raw_covariance),
    ArrayRule("shifted-softmax", "Shift by the maximum before exp (softmax cannot overflow)", _softmax),
    ArrayRule("shifted-log-sum-exp", "Shift by the maximum (log-sum-exp cannot overflow)", _log_sum_exp),
    ArrayRule("scaled-norm", "Use math.hypot(*x): a 2-norm that cannot overflow", _norm),
    ArrayRule("difference-distance", "Sum the squared differences instead of expanding the square", _distance),
)

_SECONDS = 4.0


def array_fixes(subject: "Subject", cfg: Config) -> list[Fix]:
    """Verified fixes for a finding on array code, best first."""
    site, finding = subject.site, subject.finding
    if any(n.format is not BINARY64 for n in topological(site.root)):
        return []
    deadline = Deadline(_SECONDS)
    found: list[tuple[float, Fix]] = []
    for node in topological(site.root):
        for rule in RULES:
            cand = rule.match(node, site)
            if cand is None or cand.target.span is None or not _only_use(cand, site, subject.index.tree):
                continue
            try:
                evidence = judge(site, cfg, substitute(site.root, cand.target, cand.replacement), deadline)
            except BudgetExceeded:
                return []
            if evidence is None:
                continue
            spell = Spell(subject.index.tree)
            text = cand.text(spell)
            found.append((evidence[1], Fix(title=rule.title, replacement=text, span=cand.target.span,
                                           imports=sorted(set(spell.imports)), measured_digits_lost_after=evidence[1],
                                           measured_digits_lost_before=evidence[0], rule=rule.id)))
    fixes = [f for _, f in sorted(found, key=lambda p: p[0])]
    return rechecked(fixes, finding, subject.index, subject.reanalyse)


def _only_use(cand: Candidate, site: Site, tree: ast.Module) -> bool:
    """A target bound to a name on another line may be replaced only when the site is its only reader."""
    binding = site.bindings_by_node.get(id(cand.target))
    if binding is None or site.span.contains(cand.target.span):  # type: ignore[arg-type]
        return True
    uses = [n for n in ast.walk(tree) if isinstance(n, ast.Name) and n.id == binding.name
            and isinstance(n.ctx, ast.Load) and n.lineno > binding.line]
    stores = [n.lineno for n in ast.walk(tree) if isinstance(n, ast.Name) and n.id == binding.name
              and isinstance(n.ctx, ast.Store) and n.lineno > binding.line]
    inside = [u for u in uses if site.span.contains(Span(u.lineno, u.col_offset, u.end_lineno or u.lineno,
                                                           u.end_col_offset or u.col_offset))]
    return not stores and bool(uses) and len(inside) == len(uses)


def judge(site: Site, cfg: Config, candidate: Node, deadline: Deadline) -> tuple[float, float] | None:
    """(worst digits lost before, after) when the candidate computes the same numbers exactly and is
    measured better on the site's sampled arrays (≥ 1 digit at the worst, never ¼ digit worse); else None."""
    before_nodes, after_nodes = topological(site.root), topological(candidate)
    names = sorted({n.name for n in before_nodes if n.kind == INPUT})  # type: ignore[misc]
    if {n.name for n in after_nodes if n.kind == INPUT} - set(names):
        return None
    cols, _, _, _ = sample_inputs(site, names, cfg, zlib.crc32(site.root.key().encode()))
    f0 = np.asarray(forward(before_nodes, cols, F64_BACKEND, deadline)[id(site.root)], dtype=float)
    f1 = np.asarray(forward(after_nodes, cols, F64_BACKEND, deadline)[id(candidate)], dtype=float)
    idx = _rows(f0, f1)
    sub = {k: v[idx] for k, v in cols.items()}
    r0, dps0 = reference(before_nodes, sub, deadline)
    r1, dps1 = reference(after_nodes, sub, deadline)
    with mpmath.workdps(max(dps0, dps1)):
        e0, e1 = r0[id(site.root)], r1[id(candidate)]
        if np.shape(e0) != np.shape(e1) and not (np.ndim(e0) == 2 and np.ndim(e1) == 2):
            return None
        e1 = np.broadcast_to(e1, np.shape(e0)) if np.shape(e1) != np.shape(e0) else e1
        if not np.all(mp_difference(e1, e0) < 1e-20):  # the same numbers, defined at the same samples
            return None
        u, total = BINARY64.unit_roundoff, BINARY64.digits
        lost0 = _digits(normwise_error(f0[idx], e0), u, total)
        lost1 = _digits(normwise_error(np.broadcast_to(f1[idx], f0[idx].shape), e0), u, total)
    ok = ~np.isnan(lost0)
    if not ok.any():
        return None
    b, a = float(np.max(lost0[ok])), float(np.max(lost1[ok]))
    # losses below NOISE digits count as NOISE (a few ulps either way are not a difference), as for scalars
    if a <= b - 1.0 and np.all(np.maximum(lost1[ok], NOISE) <= np.maximum(lost0[ok], NOISE) + MAX_WORSE):
        return b, a
    return None


def _rows(f0: np.ndarray, f1: np.ndarray) -> np.ndarray:
    """Rows to check exactly: where either result is not finite, and a spread over the rest."""
    n = f0.shape[0]
    bad = np.flatnonzero(~np.all(np.isfinite(f0), axis=-1) | ~np.all(np.isfinite(np.broadcast_to(f1, f0.shape)), axis=-1))
    return np.array(sorted(set(bad[:6].tolist()) | set(np.linspace(0, n - 1, 10).astype(int).tolist())))


def _digits(err: np.ndarray, u: float, total: float) -> np.ndarray:
    with np.errstate(all="ignore"):
        d = np.log10(np.maximum(np.nan_to_num(err, nan=np.nan, posinf=np.inf) / u, 1.0))
    return np.minimum(d, total)
