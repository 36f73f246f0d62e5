"""Which number format a value is in, read from the code: casts (`np.float32(x)`, `x.astype("float16")`,
`np.asarray(x, dtype=…)`), `dtype=` arguments, annotations (`np.float32`, `npt.NDArray[np.float32]`), and how
an operation's format follows from its operands' (numpy's promotion: `numeric.formats.promote`).
Nothing is imported or run: dtypes are recognised by how they are spelled.
"""
from __future__ import annotations

import ast
from fractions import Fraction

from condhint.expr import CONST, Node
from condhint.numeric.formats import BINARY64, FORMATS, Format, format_named, promote
from condhint.reading.names import Names

# How numpy and ml_dtypes spell the dtypes of our formats (as attributes, from-imports and strings).
_DTYPE_NAMES: dict[str, Format] = {
    **{name: f for f in FORMATS.values() for name in f.names},
    "f8": FORMATS["binary64"], "f4": FORMATS["binary32"], "f2": FORMATS["binary16"], "float_": FORMATS["binary64"],
}
_CAST_CALLS = {"float64", "double", "float32", "single", "float16", "half", "bfloat16", "float_"}
_ARRAY_CONSTRUCTORS = {"asarray", "array", "asanyarray", "ascontiguousarray"}
_NUMERIC_MODULES = ("numpy", "ml_dtypes")


def format_of_dtype(e: ast.expr | None, names: Names) -> Format | None:
    """The format a dtype expression names: `np.float32`, `"float32"`, `np.dtype("f4")`, `ml_dtypes.bfloat16`,
    `float` (binary64), or a from-imported `float16`; None when it names none of ours."""
    if e is None:
        return None
    if isinstance(e, ast.Constant) and isinstance(e.value, str):
        return _DTYPE_NAMES.get(e.value.lower())
    if isinstance(e, ast.Name):
        if e.id == "float" and "float" not in names.shadowed:
            return BINARY64
        origin = names.dtype_names.get(e.id)
        return format_named(origin) if origin else None
    if isinstance(e, ast.Attribute) and isinstance(e.value, ast.Name) and \
            names.modules.get(e.value.id) in _NUMERIC_MODULES:
        return _DTYPE_NAMES.get(e.attr)
    if isinstance(e, ast.Call) and _is_numpy_attr(e.func, "dtype", names) and len(e.args) == 1:
        return format_of_dtype(e.args[0], names)
    return None


_LIMITS = {"eps": lambda f: 2 * f.unit_roundoff, "epsneg": lambda f: f.unit_roundoff, "tiny": lambda f: f.smallest_normal,
           "smallest_normal": lambda f: f.smallest_normal, "smallest_subnormal": lambda f: f.smallest_subnormal,
           "max": lambda f: f.largest}


def format_limit(e: ast.Attribute, names: Names) -> Fraction | None:
    """`np.finfo(np.float32).eps`, `np.finfo(float).max`: the exact limit from the format record."""
    call = e.value
    if e.attr not in _LIMITS or not isinstance(call, ast.Call) or len(call.args) != 1 or \
            _numpy_callee(call.func, names) != "finfo":
        return None
    fmt = format_of_dtype(call.args[0], names)
    return None if fmt is None else Fraction(_LIMITS[e.attr](fmt))


def format_of_annotation(e: ast.expr | None, names: Names) -> Format | None:
    """The element format an annotation states: `np.float32`, `npt.NDArray[np.float16]`,
    `np.ndarray[tuple[int], np.dtype[np.float32]]`; None when it states none."""
    if e is None:
        return None
    if isinstance(e, ast.Constant) and isinstance(e.value, str):
        return None  # a string annotation is not read (it would need parsing user text)
    if isinstance(e, ast.Subscript):
        base = e.value.attr if isinstance(e.value, ast.Attribute) else e.value.id if isinstance(e.value, ast.Name) else ""
        args = e.slice.elts if isinstance(e.slice, ast.Tuple) else [e.slice]
        if base in ("NDArray", "ndarray", "dtype"):
            return next((f for f in (format_of_annotation(a, names) for a in reversed(args)) if f), None)
        return None
    if isinstance(e, ast.Name) and e.id == "float":
        return None  # `x: float` is a Python float: binary64, and weak (see `typed_input`)
    return format_of_dtype(e, names)


def cast_target(call: ast.Call, names: Names) -> tuple[Format, ast.expr] | None:
    """(format, value) of a conversion call: `np.float32(x)`, `x.astype(np.float16)`, `np.asarray(x, dtype=…)`."""
    f = call.func
    if isinstance(f, ast.Attribute) and f.attr == "astype" and call.args:
        fmt = format_of_dtype(call.args[0], names)
        return (fmt, f.value) if fmt is not None else None
    if len(call.args) == 1 and not call.keywords and _dtype_callee(f, names) in _CAST_CALLS:
        fmt = format_of_dtype(f, names)
        return (fmt, call.args[0]) if fmt is not None else None
    if _numpy_callee(f, names) in _ARRAY_CONSTRUCTORS and call.args:
        dtype = next((k.value for k in call.keywords if k.arg == "dtype"), call.args[1] if len(call.args) > 1 else None)
        fmt = format_of_dtype(dtype, names)
        return (fmt, call.args[0]) if fmt is not None else None
    return None


def dtype_keyword(call: ast.Call, names: Names) -> Format | None:
    """The format a `dtype=` argument of an elementwise call asks the operation to compute in."""
    return format_of_dtype(next((k.value for k in call.keywords if k.arg == "dtype"), None), names)


def result_format(args: tuple[Node, ...], module: str | None) -> tuple[Format, bool]:
    """The format (and weakness) an operation computes in: `math` functions compute in binary64 and return a
    Python float; numpy functions and Python's operators follow numpy's promotion of their operands."""
    if module == "math":
        return BINARY64, True
    fmt, weak = args[0].format, args[0].weak or args[0].is_int
    for a in args[1:]:
        fmt, weak = promote(fmt, weak, a.format, a.weak or a.is_int)
    if module in ("numpy", "scipy.special") and weak:
        return fmt, False  # a numpy function returns a numpy value even of Python floats
    return fmt, weak


def in_format(node: Node, fmt: Format, force: bool = False) -> Node:
    """`node` as an operand of an operation computing in `fmt`: a weak (Python) value is converted (a literal
    rounded to `fmt`, another value through an explicit conversion node); a strong one is widened exactly, or
    converted too when `force` (a `dtype=` argument)."""
    if node.format is fmt or not (node.weak or node.is_int or force) or not fmt.narrower_than(node.format):
        return node
    if node.kind == CONST and node.value is not None:
        value = float(fmt.round([node.value])[0])
        return Node(CONST, value=value, exact=node.exact, span=node.span, is_int=node.is_int, text=node.text,
                    format=fmt, weak=False)
    return Node("cast", (node,), span=node.span, text=node.text, format=fmt, weak=False)


def _dtype_callee(f: ast.expr, names: Names) -> str:
    if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name) and \
            names.modules.get(f.value.id) in _NUMERIC_MODULES:
        return f.attr
    if isinstance(f, ast.Name) and f.id in names.dtype_names:
        return names.dtype_names[f.id] if names.dtype_names[f.id] in _CAST_CALLS else f.id
    return ""


def _numpy_callee(f: ast.expr, names: Names) -> str:
    if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name) and names.modules.get(f.value.id) == "numpy":
        return f.attr
    return ""


def _is_numpy_attr(f: ast.expr, attr: str, names: Names) -> bool:
    return _numpy_callee(f, names) == attr
