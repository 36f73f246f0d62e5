"""What the code shows to be an integer, or not a binary64 number at all, beyond what expressions say.

Integers are exact and never reported: parameters annotated `int` (or a numpy integer type) or defaulting to
an int literal, and names the code uses as integers — an index or slice bound, a repetition count of a str
or list, the argument of `range`, an array length, `math.comb`/`factorial`. Results of calls that return
integers (`np.arange` of integers, `argmax`, `nonzero`, …) are integers too. Objects of classes the code does
not define (a call of a CamelCase name that is not a known conversion: `Time(…)`, `Quantity(…)`) are not
binary64 numbers unless the code shows it: their arithmetic may be exact, symbolic, of another precision, or
not arithmetic at all, so they are not analysed; nor are the numbers of an arithmetic context object (`ctx.mpf(2)`,
`ctx.eps` in mpmath's own functions).
"""
from __future__ import annotations

import ast

_INT_ANNOTATIONS = {"int", "int8", "int16", "int32", "int64", "intp", "uint8", "uint16", "uint32", "uint64", "uint",
                    "integer", "signedinteger", "unsignedinteger", "Integral"}
_INT_RESULTS = {"argmax", "argmin", "argsort", "nonzero", "flatnonzero", "searchsorted", "count_nonzero",
                "comb", "perm", "factorial", "gcd", "lcm", "isqrt", "bit_length", "indices", "digitize"}
_COUNT_ARGUMENTS = {"range": None, "comb": None, "perm": None, "factorial": None, "zeros": 0, "ones": 0,
                    "empty": 0, "full": 0, "eye": None, "identity": 0, "tile": 1, "repeat": 1}


def int_annotation(e: ast.expr | None) -> bool:
    """`int`, `np.int64`, `numbers.Integral`, …"""
    if isinstance(e, ast.Name):
        return e.id in _INT_ANNOTATIONS
    if isinstance(e, ast.Attribute):
        return e.attr in _INT_ANNOTATIONS
    return False


def int_default(e: ast.expr | None) -> bool:
    """A parameter default that is an int literal (`n=10`, `k=-1`), not a bool."""
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, (ast.USub, ast.UAdd)):
        e = e.operand
    return isinstance(e, ast.Constant) and isinstance(e.value, int) and not isinstance(e.value, bool)


def returns_int(call: ast.Call) -> bool:
    """Calls whose result is an integer (or integers): `np.argmax(x)`, `x.nonzero()`, `math.comb(n, k)`,
    `np.arange(n)` with integer arguments (see `used_as_integers` for names), `round(x)` without digits."""
    f = call.func
    name = f.attr if isinstance(f, ast.Attribute) else f.id if isinstance(f, ast.Name) else ""
    if name in _INT_RESULTS:
        return True
    if name == "round":
        return len(call.args) == 1 and not call.keywords
    if name in ("arange", "indices"):  # integers unless a bound or step is a float literal or a dtype is given
        return not any(isinstance(a, ast.Constant) and isinstance(a.value, float) for a in call.args) and not any(
            k.arg == "dtype" for k in call.keywords)
    return False


def makes_object(call: ast.Call, known: set[str]) -> bool:
    """A call that makes an object of a class the module does not show to be a float: a CamelCase callee
    (`Time(…)`, `units.Quantity(…)`) that is not one of the names in `known` (conversions, the module's own
    classes' float-valued methods are not calls of the class)."""
    f = call.func
    name = f.attr if isinstance(f, ast.Attribute) else f.id if isinstance(f, ast.Name) else ""
    return bool(name) and name[0].isupper() and any(c.islower() for c in name) and name not in known


CONTEXTS = {"ctx"}  # names of arithmetic-context objects (mpmath's convention): their numbers are not binary64


def in_context_object(e: ast.expr) -> bool:
    """`ctx.mpf(2)`, `ctx.eps`, `ctx.j`: values of an arithmetic context, with their own precision and range."""
    return isinstance(e, ast.Attribute) and isinstance(e.value, ast.Name) and e.value.id in CONTEXTS


def used_as_integers(body: list[ast.stmt]) -> set[str]:
    """Names the code uses where only an integer works: subscripts' indices and slice bounds (`a[n]`,
    `a[i:j]`, `a[n - 1]`), repetition counts (`k * " "`, `[0] * n`), arguments of `range` and of array
    constructors' shapes, `math.comb`/`factorial`."""
    found: set[str] = set()
    stack: list[ast.AST] = list(body)
    while stack:
        node = stack.pop()
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef, ast.Lambda)):
            continue
        if isinstance(node, ast.Subscript):
            found |= _index_names(node.slice)
        elif isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            for count, seq in ((node.left, node.right), (node.right, node.left)):
                if _is_sequence_literal(seq):
                    found |= _bare_names(count)
        elif isinstance(node, ast.Call):
            name = node.func.attr if isinstance(node.func, ast.Attribute) else \
                node.func.id if isinstance(node.func, ast.Name) else ""
            if name in _COUNT_ARGUMENTS:
                at = _COUNT_ARGUMENTS[name]
                args = node.args if at is None else node.args[at:at + 1]
                for a in args:
                    found |= _bare_names(a)
        stack.extend(ast.iter_child_nodes(node))
    return found


def _index_names(s: ast.expr) -> set[str]:
    if isinstance(s, ast.Slice):
        return set().union(*(_bare_names(p) for p in (s.lower, s.upper, s.step) if p is not None))
    if isinstance(s, ast.Tuple):
        return set().union(*(_index_names(e) for e in s.elts)) if s.elts else set()
    return _bare_names(s)


def _bare_names(e: ast.expr) -> set[str]:
    """The names in `n`, `n - 1`, `-n`, `n + k`: an integer expression's own names (not through calls)."""
    if isinstance(e, ast.Name):
        return {e.id}
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub):
        return _bare_names(e.operand)
    if isinstance(e, ast.BinOp) and isinstance(e.op, (ast.Add, ast.Sub, ast.Mult, ast.FloorDiv)):
        return _bare_names(e.left) | _bare_names(e.right)
    return set()


def _is_sequence_literal(e: ast.expr) -> bool:
    return isinstance(e, (ast.List, ast.Tuple)) or (isinstance(e, ast.Constant) and isinstance(e.value, (str, bytes)))


def literal_numbers(e: ast.expr) -> list[int | float] | None:
    """The values of a literal tuple or list of numbers (`(1, 2, 4)`, `[0.1, 3]`), or None."""
    if not isinstance(e, (ast.Tuple, ast.List)) or not e.elts:
        return None
    out: list[int | float] = []
    for x in e.elts:
        negative = isinstance(x, ast.UnaryOp) and isinstance(x.op, (ast.USub, ast.UAdd))
        core = x.operand if negative else x  # type: ignore[attr-defined]
        if not (isinstance(core, ast.Constant) and isinstance(core.value, (int, float))
                and not isinstance(core.value, bool)):
            return None
        out.append(-core.value if isinstance(x, ast.UnaryOp) and isinstance(x.op, ast.USub) else core.value)
    return out
