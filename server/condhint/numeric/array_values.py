"""Values of a site with array inputs: samples × elements matrices, evaluated forward and differentiated.

Every value is a matrix with one row per sample: an array input or elementwise result is (samples, L), a
scalar (a scalar input, a reduction) is (samples, 1), so numpy's broadcasting is the code's own. The binary64
backend runs numpy's own routines (pairwise summation along each contiguous row, as for a 1-D array); the
reference runs on object arrays of mpmath numbers with exact reductions (`mpmath.fsum`).
"""
from __future__ import annotations

from typing import Any

import mpmath
import numpy as np

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node
from condhint.numeric.backends import F64_BACKEND, MP_BACKEND, mp_constant
from condhint.numeric.evaluate import Deadline
from condhint.numeric.operations import OPERATIONS
from condhint.numeric.reductions import REDUCTIONS, evaluate_f64, evaluate_mp, vjp

Values = dict[int, Any]
_COMPARE = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal, "==": np.equal,
            "!=": np.not_equal}


def ddof_of(node: Node) -> int:
    """The `ddof=` of a var/std node (kept in its name, so it is part of the structural key)."""
    return int(node.name[5:]) if node.name and node.name.startswith("ddof=") else 0


def to_mp(a: np.ndarray) -> np.ndarray:
    """binary64 matrix -> object matrix of the same (exact) numbers as mpmath values."""
    return np.frompyfunc(mpmath.mpf, 1, 1)(a).astype(object)


def forward(nodes: list[Node], inputs: dict[str, np.ndarray], backend: Any,
            deadline: Deadline | None = None) -> Values:
    """Value of every node at every sample; `inputs` holds binary64 matrices by input name."""
    mp = backend is MP_BACKEND
    n = next((len(v) for v in inputs.values()), 1)
    vals: Values = {}
    with np.errstate(all="ignore"):
        for node in nodes:
            if deadline is not None:
                deadline.check()
            k = node.kind
            if k == INPUT:
                x = inputs[node.name]  # type: ignore[index]
                vals[id(node)] = to_mp(x) if mp and x.dtype != object else x
            elif k == CONST:
                vals[id(node)] = (mp_constant(node.exact) if node.exact is not None else mpmath.mpf(node.value)) \
                    if mp else float(node.value)  # type: ignore[arg-type]
            elif k == COMPARE:
                a, b = (vals[id(x)] for x in node.args)
                vals[id(node)] = np.asarray(_COMPARE[node.name](a, b), dtype=bool)  # type: ignore[index]
            elif k == SELECT:
                c, a, b = (vals[id(x)] for x in node.args)
                vals[id(node)] = backend.where(c, a, b)
            elif k in REDUCTIONS:
                r = REDUCTIONS[k]
                args = [_matrix(vals[id(x)], n, backend) for x in node.args]
                vals[id(node)] = (evaluate_mp if mp else evaluate_f64)(r, ddof_of(node), *args)
            else:
                fn = OPERATIONS[k]
                args = [vals[id(x)] for x in node.args]
                vals[id(node)] = fn.mp(*args) if mp else np.asarray(fn.f64(*args), dtype=float)
    return vals


def _matrix(v: Any, n: int, backend: Any) -> np.ndarray:
    """A reduction's operand as a matrix (a constant operand is one element per sample)."""
    if isinstance(v, np.ndarray) and v.ndim == 2:
        return v
    return np.full((n, 1), v, dtype=object if backend is MP_BACKEND else float)


def reverse(nodes: list[Node], vals: Values) -> Values:
    """binary64 adjoints ∂root/∂node, summed over the root's elements (each of the shape of its node)."""
    root = nodes[-1]
    adj: Values = {id(root): np.ones_like(np.asarray(vals[id(root)], dtype=float))}
    with np.errstate(all="ignore"):
        for node in reversed(nodes):
            g = adj.get(id(node))
            if g is None or node.kind in (INPUT, CONST, COMPARE):
                continue
            args = [vals[id(a)] for a in node.args]
            if node.kind in REDUCTIONS:
                parts = vjp(REDUCTIONS[node.kind], ddof_of(node), [np.asarray(a, dtype=float) for a in args],
                            vals[id(node)], g)
            elif node.kind == SELECT:
                c = args[0]
                parts = (0.0, g * np.where(c, 1.0, 0.0), g * np.where(c, 0.0, 1.0))
            else:
                ps = OPERATIONS[node.kind].partials(F64_BACKEND, args, vals[id(node)])
                parts = tuple(g * p for p in ps)
            for arg, p in zip(node.args, parts):
                if arg.kind in (CONST, COMPARE):
                    continue
                p = _unbroadcast(np.asarray(p, dtype=float), np.shape(vals[id(arg)]))
                prev = adj.get(id(arg))
                adj[id(arg)] = p if prev is None else prev + p
    return adj


def _unbroadcast(p: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """An adjoint contribution summed back to its operand's shape (a scalar broadcast over elements)."""
    if p.shape == shape:
        return p
    if len(shape) == 2 and shape[1] == 1 and p.ndim == 2:
        return p.sum(axis=-1, keepdims=True)
    return np.broadcast_to(p, shape).copy() if p.size < np.prod(shape) else p


def floats(a: Any) -> np.ndarray:
    """A value as a binary64 matrix (mpmath values rounded; out of range: ±inf)."""
    if isinstance(a, np.ndarray) and a.dtype == object:
        return np.frompyfunc(float, 1, 1)(a).astype(float)
    return np.asarray(a, dtype=float)


def normwise_error(approx: np.ndarray, exact: np.ndarray) -> np.ndarray:
    """Per row: max |approx − exact| / max |exact| (the max-norm relative error of a vector, of a number its
    relative error); nan where the exact row is undefined or zero, inf where approx is not finite."""
    a = np.atleast_2d(np.asarray(approx, dtype=float))
    e = np.atleast_2d(exact)
    out = np.empty(a.shape[0])
    for i in range(a.shape[0]):
        row = e[i]
        if any(mpmath.isnan(v) for v in row):
            out[i] = np.nan
            continue
        scale = max(abs(v) for v in row)
        if scale == 0 or mpmath.isinf(scale):
            out[i] = np.nan
            continue
        if not np.all(np.isfinite(a[i])):
            out[i] = np.inf
            continue
        out[i] = float(max(abs(mpmath.mpf(float(x)) - v) for x, v in zip(a[i], row)) / scale)
    return out


def reference(nodes: list[Node], cols: dict[str, np.ndarray], deadline: Deadline | None
              ) -> tuple[dict[int, Any], int]:
    """mpmath values at a precision checked to be enough: the rows where the most cancels (the largest
    intermediate against the result) are evaluated again at twice the precision and must agree to 22 digits;
    else the precision doubles for every row."""
    root = nodes[-1]
    exact_inputs = {k: to_mp(v) for k, v in cols.items()}  # exact at any precision ≥ 53 bits
    dps = 50
    while True:
        with mpmath.workdps(dps):
            vals = forward(nodes, exact_inputs, MP_BACKEND, deadline)
            rows = _deepest(nodes, vals)
            if dps >= 400:
                return vals, dps
        with mpmath.workdps(2 * dps):
            again = forward(nodes, {k: v[rows] for k, v in exact_inputs.items()}, MP_BACKEND, deadline)
            if _agree(np.atleast_2d(vals[id(root)])[rows], again[id(root)]):
                return vals, dps
        dps *= 2


def _deepest(nodes: list[Node], vals: dict[int, Any], k: int = 2) -> np.ndarray:
    """The k rows whose largest intermediate value is largest against the result (the deepest cancellation)."""
    with np.errstate(all="ignore"):
        res = np.max(np.abs(floats(vals[id(nodes[-1])])), axis=-1)
        big = np.zeros_like(res)
        for n in nodes:
            v = vals[id(n)]
            if isinstance(v, np.ndarray) and v.ndim == 2:
                big = np.maximum(big, np.nan_to_num(np.max(np.abs(floats(v)), axis=-1), nan=0.0, posinf=1e308))
        depth = np.nan_to_num(big / res, nan=np.inf, posinf=np.inf)
    return np.sort(np.argsort(-depth, kind="stable")[:k])


def mp_difference(a: Any, b: Any) -> np.ndarray:
    """Per row, max |a − b| / max |b| of two mpmath evaluations (0 where both rows hold the same non-finite
    values, inf where they differ in definedness)."""
    out = []
    for ra, rb in zip(np.atleast_2d(a), np.atleast_2d(b)):
        odd = [not mpmath.isfinite(x) for x in (*ra, *rb)]
        if any(odd):
            same = all((mpmath.isnan(x) and mpmath.isnan(y)) or x == y for x, y in zip(ra, rb))
            out.append(0.0 if same else np.inf)
            continue
        scale = max(abs(x) for x in rb)
        diff = max(abs(x - y) for x, y in zip(ra, rb))
        out.append(0.0 if diff == 0 else float(diff / scale) if scale != 0 else np.inf)
    return np.array(out)


def _agree(a: Any, b: Any) -> bool:
    """Two mpmath evaluations agree to 22 digits, normwise per row (or are the same non-finite values)."""
    return bool(np.all(mp_difference(a, b) < 1e-22))
