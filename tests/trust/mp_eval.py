"""Test-only evaluator for sampled snippets: walks an expression's `ast` explicitly (no eval/exec) and evaluates
it either in mpmath at high precision or in binary64 (Python floats / numpy float64).

Names, attributes and subscripts that are not called (``x``, ``self.a``, ``p[0]``) are variables, looked up by
their source text. Calls go through a fixed table of math/numpy functions; anything else raises Unsupported.
"""
from __future__ import annotations

import ast
import math
from typing import Callable, Mapping

import mpmath
import numpy as np

Number = float | mpmath.mpf


class Unsupported(Exception):
    """The snippet uses a construct this evaluator does not map."""


def _mp_log1p(x: mpmath.mpf) -> mpmath.mpf:
    return mpmath.log1p(x)


def _mp_expm1(x: mpmath.mpf) -> mpmath.mpf:
    return mpmath.expm1(x)


# function name (last dotted part) -> (mpmath implementation, binary64 implementation)
_FUNCS: dict[str, tuple[Callable, Callable]] = {
    "sqrt": (mpmath.sqrt, np.sqrt), "exp": (mpmath.exp, np.exp), "log": (mpmath.log, np.log),
    "log10": (mpmath.log10, np.log10), "log2": (lambda x: mpmath.log(x, 2), np.log2),
    "log1p": (_mp_log1p, np.log1p), "expm1": (_mp_expm1, np.expm1),
    "sin": (mpmath.sin, np.sin), "cos": (mpmath.cos, np.cos), "tan": (mpmath.tan, np.tan),
    "arcsin": (mpmath.asin, np.arcsin), "asin": (mpmath.asin, np.arcsin),
    "arccos": (mpmath.acos, np.arccos), "acos": (mpmath.acos, np.arccos),
    "arctan": (mpmath.atan, np.arctan), "atan": (mpmath.atan, np.arctan),
    "arctan2": (mpmath.atan2, np.arctan2), "atan2": (mpmath.atan2, np.arctan2),
    "sinh": (mpmath.sinh, np.sinh), "cosh": (mpmath.cosh, np.cosh), "tanh": (mpmath.tanh, np.tanh),
    "arcsinh": (mpmath.asinh, np.arcsinh), "asinh": (mpmath.asinh, np.arcsinh),
    "arccosh": (mpmath.acosh, np.arccosh), "acosh": (mpmath.acosh, np.arccosh),
    "arctanh": (mpmath.atanh, np.arctanh), "atanh": (mpmath.atanh, np.arctanh),
    "hypot": (mpmath.hypot, np.hypot), "abs": (abs, abs), "fabs": (abs, np.fabs), "absolute": (abs, np.abs),
    "square": (lambda x: x * x, np.square), "power": (lambda a, b: a ** b, np.power),
    "pow": (lambda a, b: a ** b, lambda a, b: np.power(np.float64(a), b)),
    "sinc": (lambda x: mpmath.sinc(mpmath.pi * x), np.sinc),
    "sign": (mpmath.sign, np.sign), "copysign": (lambda a, b: abs(a) * mpmath.sign(b) if b else abs(a),
                                               np.copysign),
    "logaddexp": (lambda a, b: mpmath.log(mpmath.exp(a) + mpmath.exp(b)), np.logaddexp),
    "float": (lambda x: x, float), "float64": (lambda x: x, np.float64),
    "max": (max, max), "min": (min, min), "maximum": (max, np.maximum), "minimum": (min, np.minimum),
    "cbrt": (mpmath.cbrt, np.cbrt),
    "erf": (mpmath.erf, math.erf), "erfc": (mpmath.erfc, math.erfc),
    "gamma": (mpmath.gamma, math.gamma), "lgamma": (lambda x: mpmath.log(abs(mpmath.gamma(x))), math.lgamma),
    "radians": (lambda x: x * mpmath.pi / 180, math.radians), "degrees": (lambda x: x * 180 / mpmath.pi, math.degrees),
    "where": (lambda c, a, b: a if c else b, lambda c, a, b: a if c else b),
}
# comparisons (the condition of `np.where`)
_COMPARE = {ast.Lt: lambda a, b: a < b, ast.LtE: lambda a, b: a <= b, ast.Gt: lambda a, b: a > b,
            ast.GtE: lambda a, b: a >= b}
_CONSTS: dict[str, tuple[Callable[[], Number], float]] = {
    "pi": (lambda: +mpmath.pi, math.pi), "e": (lambda: +mpmath.e, math.e), "inf": (lambda: mpmath.inf, math.inf),
}
_MODULES = {"math", "np", "numpy", "cmath", "mpmath", "special", "sc", "scipy"}


def _dotted(node: ast.AST) -> str | None:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        base = _dotted(node.value)
        return None if base is None else f"{base}.{node.attr}"
    return None


class Evaluator:
    """Evaluates one parsed expression in mpmath (`mode="mp"`) or binary64 (`mode="f64"`)."""

    def __init__(self, mode: str) -> None:
        assert mode in ("mp", "f64")
        self.mode = mode

    def value(self, node: ast.AST, env: Mapping[str, float]) -> Number:
        mp = self.mode == "mp"
        if isinstance(node, ast.Expression):
            return self.value(node.body, env)
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise Unsupported(f"constant {node.value!r}")
            return mpmath.mpf(node.value) if mp else np.float64(node.value)
        if isinstance(node, ast.UnaryOp):
            v = self.value(node.operand, env)
            if isinstance(node.op, ast.USub):
                return -v
            if isinstance(node.op, ast.UAdd):
                return +v
            raise Unsupported(type(node.op).__name__)
        if isinstance(node, ast.BinOp):
            a, b = self.value(node.left, env), self.value(node.right, env)
            if not mp:
                a, b = np.float64(a), np.float64(b)
            op = node.op
            if isinstance(op, ast.Add):
                return a + b
            if isinstance(op, ast.Sub):
                return a - b
            if isinstance(op, ast.Mult):
                return a * b
            if isinstance(op, ast.Div):
                return a / b
            if isinstance(op, ast.Pow):
                return a ** b
            raise Unsupported(type(op).__name__)
        if isinstance(node, ast.IfExp):  # Python evaluates only the branch taken
            return self.value(node.body if self.value(node.test, env) else node.orelse, env)
        if isinstance(node, ast.Compare) and len(node.ops) == 1 and type(node.ops[0]) in _COMPARE:
            return _COMPARE[type(node.ops[0])](self.value(node.left, env), self.value(node.comparators[0], env))
        if isinstance(node, ast.Call):
            name = _dotted(node.func)
            if name is None or node.keywords:
                raise Unsupported(ast.unparse(node.func))
            if _opaque(node):
                return self._lookup(node, env)
            parts = name.split(".")
            if parts[-1] not in _FUNCS:
                raise Unsupported(name)
            fn = _FUNCS[parts[-1]][0 if mp else 1]
            args = [self.value(a, env) for a in node.args]
            return fn(*args)
        if isinstance(node, ast.Attribute) and _dotted(node) is not None:
            parts = _dotted(node).split(".")
            if parts[0] in _MODULES and parts[-1] in _CONSTS:
                c = _CONSTS[parts[-1]]
                return c[0]() if mp else c[1]
        if isinstance(node, (ast.Name, ast.Attribute, ast.Subscript)):
            return self._lookup(node, env)
        raise Unsupported(type(node).__name__)

    def _lookup(self, node: ast.AST, env: Mapping[str, float]) -> Number:
        key = ast.unparse(node)
        if key not in env:
            raise Unsupported(f"unbound {key}")
        v = env[key]
        return (v if isinstance(v, mpmath.mpf) else mpmath.mpf(v)) if self.mode == "mp" else np.float64(v)


def _opaque(node: ast.Call) -> bool:
    """A call the evaluator does not model (`seed.random()`): a variable named by its source text, as condhint
    names such inputs. Calls of the math/numpy modules themselves are never opaque."""
    name = _dotted(node.func)
    if name is None:
        return True
    parts = name.split(".")
    if parts[0] in _MODULES:
        return False
    return len(parts) > 1 or parts[-1] not in _FUNCS


def variables(text: str) -> list[str]:
    """Source texts of the variables of an expression, in first-seen order."""
    out: list[str] = []

    def walk(node: ast.AST) -> None:
        if isinstance(node, ast.Call) and _opaque(node):
            key = ast.unparse(node)
            if key not in out:
                out.append(key)
            return
        if isinstance(node, ast.Call):
            for a in node.args:
                walk(a)
            return
        if isinstance(node, ast.Attribute):
            d = _dotted(node)
            if d is not None and d.split(".")[0] in _MODULES:
                return
        if isinstance(node, (ast.Name, ast.Attribute, ast.Subscript)):
            key = ast.unparse(node)
            if key not in out:
                out.append(key)
            return
        for child in ast.iter_child_nodes(node):
            walk(child)

    walk(ast.parse(text, mode="eval").body)
    return out


def _bound(ev: Evaluator, env: Mapping[str, float], bindings: Mapping[str, str]) -> dict:
    """`env` plus the names the code derives from it (`rDD = sqrt(DD)`), evaluated in order in `ev`'s mode."""
    full: dict = dict(env)
    for name, text in bindings.items():
        full[name] = ev.value(ast.parse(text, mode="eval"), full)
    return full


def mp_value(text: str, env: Mapping[str, float], bindings: Mapping[str, str] | None = None,
             dps: int = 60) -> mpmath.mpf:
    """The exact-ish value of `text` at binary64 inputs `env`, in mpmath at `dps` digits."""
    ev = Evaluator("mp")
    with mpmath.workdps(dps):
        return +ev.value(ast.parse(text, mode="eval"), _bound(ev, env, bindings or {}))


def f64_value(text: str, env: Mapping[str, float], bindings: Mapping[str, str] | None = None) -> float:
    """The value of `text` evaluated as written in binary64 (derived names too)."""
    ev = Evaluator("f64")
    with np.errstate(all="ignore"):
        return float(ev.value(ast.parse(text, mode="eval"), _bound(ev, env, bindings or {})))


def digits_lost(computed: float, exact: mpmath.mpf) -> float:
    """Decimal digits lost by `computed` against `exact` (0 = correctly rounded, 16 = nothing right)."""
    if not math.isfinite(computed) or not mpmath.isfinite(exact):
        same = (computed == exact) if not (math.isnan(computed)) else False
        return 0.0 if same else 16.0
    if exact == 0:
        return 0.0 if computed == 0 else 16.0
    with mpmath.workdps(60):
        rel = abs((mpmath.mpf(computed) - exact) / exact)
    if rel == 0:
        return 0.0
    return float(max(0.0, min(16.0, math.log10(float(rel) / 2.0 ** -53))))
