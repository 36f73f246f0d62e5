"""Forward evaluation and reverse-mode adjoints of a site's DAG, vectorised over samples, on either backend."""
from __future__ import annotations

import time
from typing import Any

import mpmath
import numpy as np

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, topological
from condhint.numeric.backends import F64_BACKEND, MP_BACKEND
from condhint.numeric.formats import BINARY64
from condhint.numeric.operations import OPERATIONS

Values = dict[int, Any]


class BudgetExceeded(Exception):
    """The site's time budget ran out."""


class Deadline:
    def __init__(self, seconds: float | None) -> None:
        self.at = None if seconds is None else time.perf_counter() + seconds

    def check(self) -> None:
        if self.at is not None and time.perf_counter() > self.at:
            raise BudgetExceeded


_COMPARE = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal, "==": np.equal,
            "!=": np.not_equal}


def forward(nodes: list[Node], inputs: dict[str, np.ndarray], backend: Any, n: int,
            deadline: Deadline | None = None) -> Values:
    """Value of every node at every sample. `inputs` holds binary64 samples by input name."""
    vals: Values = {}
    with np.errstate(all="ignore"):
        for i, node in enumerate(nodes):
            if deadline is not None and (i % 64 == 63 or backend is MP_BACKEND):  # one mpmath op can be slow
                deadline.check()
            k = node.kind
            if k == INPUT:
                x = inputs[node.name]  # type: ignore[index]
                if node.format is not BINARY64:
                    x = node.format.round(x)  # an input held in a narrower format is a number of that format
                vals[id(node)] = backend.asarray(x) if backend is MP_BACKEND else x
            elif k == CONST:
                vals[id(node)] = backend.const(node.value, node.exact, n)
            elif k == COMPARE:
                a, b = (vals[id(x)] for x in node.args)
                if backend is MP_BACKEND:
                    vals[id(node)] = np.array([_cmp(node.name, p, q) for p, q in zip(a, b)], dtype=bool)
                else:
                    vals[id(node)] = _COMPARE[node.name](a, b)  # type: ignore[index]
            elif k == SELECT:
                c, a, b = (vals[id(x)] for x in node.args)
                vals[id(node)] = backend.where(c, a, b)
            else:
                fn = OPERATIONS[k]
                args = [vals[id(x)] for x in node.args]
                if backend is not F64_BACKEND:
                    vals[id(node)] = fn.mp(*args)
                elif node.format is BINARY64:
                    vals[id(node)] = fn.f64(*args)
                else:  # numpy's own arithmetic in that format, kept as binary64 numbers (exactly)
                    vals[id(node)] = np.asarray(fn.evaluate(node.format, *args), dtype=float)
    return vals


def _cmp(op: str, a: Any, b: Any) -> bool:
    return bool({"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b, "==": a == b, "!=": a != b}[op])


def local_partials(node: Node, vals: Values, backend: Any) -> tuple[Any, ...]:
    """∂node/∂arg for each argument, at every sample."""
    if node.kind == SELECT:
        c = vals[id(node.args[0])]
        return (0.0, backend.where(c, 1.0, 0.0), backend.where(c, 0.0, 1.0))
    fn = OPERATIONS[node.kind]
    args = [vals[id(a)] for a in node.args]
    out = vals[id(node)]
    with np.errstate(all="ignore"):
        try:
            return fn.partials(backend, args, out)
        except (ZeroDivisionError, ValueError, OverflowError, TypeError):
            pass  # mpmath raises where binary64 gives inf/nan: evaluate sample by sample
        cols: list[list[Any]] = [[] for _ in node.args]
        for i in range(len(out)):
            try:
                ps = fn.partials(backend, [a[i:i + 1] for a in args], out[i:i + 1])
            except (ZeroDivisionError, ValueError, OverflowError, TypeError):
                ps = tuple(mpmath.mpf("nan") for _ in node.args)
            for col, p in zip(cols, ps):
                col.append(p[0] if isinstance(p, np.ndarray) else p)
        return tuple(np.array(c, dtype=object) for c in cols)


def differentiable(node: Node) -> bool:
    return node.kind not in (INPUT, CONST, COMPARE)


def reverse(nodes: list[Node], vals: Values, backend: Any, deadline: Deadline | None = None
            ) -> tuple[Values, dict[int, tuple[Any, ...]]]:
    """Adjoints ∂root/∂node for every node (reverse mode), and the local partials used."""
    root = nodes[-1]
    one = backend.const(1.0, "1", len(vals[id(root)]))
    adj: Values = {id(root): one}
    partials: dict[int, tuple[Any, ...]] = {}
    with np.errstate(all="ignore"):
        for i, node in enumerate(reversed(nodes)):
            if deadline is not None and (i % 64 == 63 or backend is MP_BACKEND):
                deadline.check()
            a = adj.get(id(node))
            if a is None or not differentiable(node):
                continue
            ps = local_partials(node, vals, backend)
            partials[id(node)] = ps
            for arg, p in zip(node.args, ps):
                if arg.kind == COMPARE:
                    continue
                contrib = a * p
                prev = adj.get(id(arg))
                adj[id(arg)] = contrib if prev is None else prev + contrib
    return adj, partials


def evaluate_constant(node: Node) -> float | None:
    """The binary64 value of a DAG without inputs, computed by our own evaluator."""
    nodes = topological(node)
    if any(n.kind == INPUT for n in nodes):
        return None
    vals = forward(nodes, {}, F64_BACKEND, 1)
    v = vals[id(node)]
    try:
        return float(np.asarray(v, dtype=float)[0])
    except (TypeError, ValueError):
        return None


def is_finite(a: np.ndarray) -> np.ndarray:
    return np.isfinite(np.asarray(a, dtype=float))
