"""Array code: reductions written as numpy functions or array methods become operations, and a site's array
inputs are recognised from how the code uses them.

Recognised calls (the records in `numeric.reductions`): `np.sum`, `np.mean`, `np.average` (unweighted),
`np.var`/`np.std` (with a literal `ddof=`), `np.prod`, `np.max`/`np.min`, `np.cumsum`, `np.linalg.norm(x)`,
`math.fsum`, `np.vdot`, and `np.dot`/`np.inner`/`a @ b` of two arrays with declared lengths (vectors; a matrix
product is left opaque), each also as a method (`x.sum()`, `x.dot(y)`). A call with `axis=`, `weights=` or any
other argument that changes what is reduced stays opaque. An input is an array when a reduction reduces it
directly, when its length is declared (`len(x) in [10, 1e5]`), or when it is the only input under a reduction;
otherwise the inputs under a reduction are arrays only if no input of the site is known to be one.
"""
from __future__ import annotations

import ast
from typing import TYPE_CHECKING

from condhint.expr import CONST, INPUT, Node, topological
from condhint.numeric.reductions import REDUCTIONS, method_spellings, module_spellings
from condhint.site import Interval

if TYPE_CHECKING:
    from condhint.reading.expressions import Converter
    from condhint.reading.ranges import Context

NOT_A_REDUCTION = object()
_METHODS = method_spellings()
_NUMPY = module_spellings("numpy")
_MATH = module_spellings("math")
_VECTOR_ONLY = ("dot", "inner")  # a product of matrices unless both operands are declared vectors


_INTEGER_DTYPES = {f"{s}int{b}" for s in ("", "u") for b in (8, 16, 32, 64)} | {"integer", "int_", "intp", "uint"}


def integer_array_annotation(e: ast.expr | None) -> bool:
    """`npt.NDArray[np.int64]`, `np.ndarray[tuple[int], np.dtype[np.uint8]]`: an array of integers."""
    if not isinstance(e, ast.Subscript):
        return False
    base = e.value.attr if isinstance(e.value, ast.Attribute) else e.value.id if isinstance(e.value, ast.Name) else ""
    if base not in ("NDArray", "ndarray"):
        return False
    args = e.slice.elts if isinstance(e.slice, ast.Tuple) else [e.slice]
    last = args[-1]
    if isinstance(last, ast.Subscript):  # np.dtype[np.int64]
        last = last.slice
    name = last.attr if isinstance(last, ast.Attribute) else last.id if isinstance(last, ast.Name) else ""
    return name in _INTEGER_DTYPES


def length_key(name: str) -> str:
    """The declared range of an array's length is the range of the name `len(x)` (as loops read it)."""
    return f"len({name})"


def reduction_call(conv: "Converter", e: ast.Call) -> "Node | None | object":
    """The reduction node a call stands for, an opaque input, or NOT_A_REDUCTION."""
    names = conv.w.names
    func = e.func
    if isinstance(func, ast.Name) and func.id == "sum" and "sum" not in names.shadowed and "sum" not in conv.env:
        return _python_sum(conv, e)
    if not isinstance(func, ast.Attribute):
        return NOT_A_REDUCTION
    module = names.module_of_call(func)
    receiver: ast.expr | None = None
    if module == "numpy":
        rid = _NUMPY.get(func.attr)
    elif module == "math":
        rid = _MATH.get(func.attr)
    elif func.attr == "norm" and isinstance(func.value, ast.Attribute) and func.value.attr == "linalg" \
            and names.module_of_call(func.value) == "numpy":
        rid = "norm"
    elif module is None and func.attr in _METHODS:
        rid, receiver = _METHODS[func.attr], func.value
    else:
        return NOT_A_REDUCTION
    if rid is None:
        return NOT_A_REDUCTION
    record = REDUCTIONS[rid]
    operands = ([receiver] if receiver is not None else []) + list(e.args)
    ddof = _ddof(e) if record.takes_ddof else (None if e.keywords else 0)
    if ddof is None or len(operands) != record.signature.min_args or any(isinstance(a, ast.Starred) for a in operands):
        return conv.opaque(e)
    nodes = [conv.convert(a) for a in operands]
    if any(n is None for n in nodes):
        return conv.opaque(e)
    args: tuple[Node, ...] = tuple(nodes)  # type: ignore[arg-type]
    if all(n.is_int or n.kind == CONST for n in args):
        return conv.opaque(e, record.id in ("sum", "prod", "amax", "amin", "cumsum"))  # integers: exact
    if func.attr in _VECTOR_ONLY and not all(_declared_vector(n, conv.ctx) for n in args):
        return conv.opaque(e)
    return _reduction(conv, rid, args, e, ddof)


def _python_sum(conv: "Converter", e: ast.Call) -> "Node | object":
    """Python's `sum(xs)` of a sequence the code names, or `sum(f(v) for v in xs)`: a sequential sum of the
    elements (of f applied to each element); other generators stay as they were."""
    if len(e.args) != 1 or e.keywords:
        return NOT_A_REDUCTION
    arg_expr = e.args[0]
    if isinstance(arg_expr, (ast.GeneratorExp, ast.ListComp)):
        arg = _elementwise(conv, arg_expr)
    elif isinstance(arg_expr, (ast.Name, ast.Attribute, ast.Subscript)):
        arg = conv.convert(arg_expr)
    else:
        return NOT_A_REDUCTION
    if arg is None or arg.is_int:
        return NOT_A_REDUCTION
    return _reduction(conv, "pysum", (arg,), e, 0)


def _elementwise(conv: "Converter", g: ast.GeneratorExp | ast.ListComp) -> Node | None:
    """`f(v) for v in xs` (one plain loop over a named sequence, no condition) as f applied to xs elementwise."""
    if len(g.generators) != 1:
        return None
    gen = g.generators[0]
    if gen.ifs or gen.is_async or not isinstance(gen.target, ast.Name) or \
            not isinstance(gen.iter, (ast.Name, ast.Attribute)):
        return None
    xs = conv.convert(gen.iter)
    if xs is None or xs.kind != INPUT:
        return None
    inner = type(conv)(conv.w, {**conv.env, gen.target.id: xs}, conv.ctx, conv.scope, conv.stmt)
    node = inner.convert(g.elt)
    conv.scanned.add(id(g))
    return node


def matmul(conv: "Converter", e: ast.BinOp, a: Node, b: Node) -> Node | None:
    """`a @ b` of two declared vectors: their dot product (else None: a matrix product, left opaque)."""
    if _declared_vector(a, conv.ctx) and _declared_vector(b, conv.ctx):
        return _reduction(conv, "dot", (a, b), e, 0)
    return None


def _reduction(conv: "Converter", rid: str, args: tuple[Node, ...], e: ast.expr, ddof: int) -> Node:
    node = conv.node(rid, args, e)
    if ddof:
        node.name = f"ddof={ddof}"  # part of the structural key: np.var(x, ddof=1) differs from np.var(x)
    return node


def _ddof(e: ast.Call) -> int | None:
    """The literal `ddof=` of var/std (0 when absent); None for any other keyword or a computed ddof."""
    ddof = 0
    for k in e.keywords:
        if k.arg != "ddof" or not (isinstance(k.value, ast.Constant) and type(k.value.value) is int):
            return None
        ddof = k.value.value
    return ddof


def _declared_vector(n: Node, ctx: "Context") -> bool:
    return n.kind == INPUT and length_key(n.name or "") in ctx.declared


def array_inputs(nodes: list[Node], ctx: "Context") -> dict[str, Interval | None]:
    """The site's array inputs and their declared lengths (None: the configured default)."""
    reductions = [n for n in nodes if n.kind in REDUCTIONS]
    if not reductions:
        return {}
    under: list[set[str]] = []
    known: set[str] = set()
    for r in reductions:
        for arg in r.args:
            leaves = _leaves_below(arg)
            under.append(leaves)
            if arg.kind == INPUT or len(leaves) == 1:
                known |= leaves
    candidates = set().union(*under)
    known |= {k for k in candidates if length_key(k) in ctx.declared}
    arrays = known if known else candidates
    return {k: ctx.declared[length_key(k)].interval if length_key(k) in ctx.declared else None
            for k in sorted(arrays)}


def _leaves_below(arg: Node) -> set[str]:
    """Names of the non-integer inputs an operand is computed from, not looking into nested reductions."""
    out: set[str] = set()
    for n in _until_reductions(arg):
        if n.kind == INPUT and not n.is_int and n.name:
            out.add(n.name)
    return out


def _until_reductions(root: Node) -> list[Node]:
    seen: set[int] = set()
    stack, order = [root], []
    while stack:
        n = stack.pop()
        if id(n) in seen:
            continue
        seen.add(id(n))
        order.append(n)
        if n.kind not in REDUCTIONS or n is root:
            stack.extend(n.args)
    return order


def mentions_reductions(root: Node) -> bool:
    return any(n.kind in REDUCTIONS for n in topological(root))
