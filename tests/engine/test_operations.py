"""Every operation record against numpy, Python's math, scipy.special, mpmath and sympy (the libraries the records
name), and every derived view (reader spellings, sympy forms, generated code) against the records."""
from __future__ import annotations

import ast
import builtins
import itertools
import math

import mpmath
import numpy as np
import pytest
import scipy.special
import sympy as sp

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.numeric.analysis import analyse
from condhint.numeric.backends import MP_BACKEND
from condhint.numeric.formats import BINARY32, BINARY64, BFLOAT16
from condhint.numeric.operation import UNARY, Operation, Spellings, quiet
from condhint.numeric.operations import OPERATIONS
from condhint.reading import names as names_module
from condhint.reading.names import Names
from condhint.rewrites.codegen import Spelling, Style
from condhint.symbolic import to_sympy

RECORDS = list(OPERATIONS.values())
MODULES = {"math": math, "numpy": np, "scipy.special": scipy.special, "builtins": builtins}
VALUES = [-2.5, -0.75, -1e-3, 0.3, 0.999, 1.5, 3.0, 10.0, 123.456]
DPS = 60  # reference: mpmath at 60 digits


def ids(op: Operation) -> str:
    return op.id


def mp_value(op: Operation, point: tuple[float, ...]) -> mpmath.mpf:
    with mpmath.workdps(DPS):
        args = [np.array([mpmath.mpf(x)], dtype=object) for x in point]
        return op.mp(*args)[0]


def inside(op: Operation, point: tuple[float, ...]) -> bool:
    """A point in the domain where the result is an ordinary binary64 number (its true value real and finite)."""
    if op.valid is not None and not op.valid(np.array(point[:1]))[0]:
        return False
    r = mp_value(op, point)
    return isinstance(r, mpmath.mpf) and mpmath.isfinite(r) and abs(r) <= BINARY64.largest


def points(op: Operation) -> list[tuple[float, ...]]:
    found = [p for p in itertools.product(VALUES, repeat=op.arity) if inside(op, p)]
    assert len(found) >= 4, f"{op.id}: too few sample points inside the domain"
    return found


def within_ulps(approx: float, exact: mpmath.mpf, ulps: float) -> bool:
    if exact == 0:
        return approx == 0
    return abs(mpmath.mpf(approx) - exact) <= ulps * mpmath.mpf(math.ulp(float(exact)))


def test_every_record_has_the_fields_other_modules_read() -> None:
    for op in RECORDS:
        assert op.arity == op.signature.fixed and op.rounds == (op.rounding.ulps > 0) and op.f64 is op.ufunc
        assert all(hasattr(op, name) for name in ("label", "domain", "valid", "mp", "partials"))
        assert any(op.spellings.by_module().values()) or not op.written, f"{op.id} cannot be spelled"


@pytest.mark.parametrize("op", RECORDS, ids=ids)
def test_binary64_evaluation_is_what_each_spelling_computes(op: Operation) -> None:
    # reference: numpy, Python's math, scipy.special and the builtins, called by the names the reader accepts;
    # numpy's own loops give the same bits, other libraries are held to the record's ulp bound (twice: both round)
    for module, spelled in op.spellings.by_module().items():
        for name in spelled:
            fn = getattr(MODULES[module], name)
            for p in points(op):
                mine = float(op.f64(*(np.array([x]) for x in p))[0])
                theirs = float(fn(*p))
                if module == "numpy":
                    assert mine == theirs or (math.isnan(mine) and math.isnan(theirs)), (name, p)
                else:
                    assert within_ulps(mine, mpmath.mpf(theirs), 2 * op.rounding.ulps), (module, name, p)


@pytest.mark.parametrize("op", RECORDS, ids=ids)
def test_binary64_is_within_the_stated_ulps_of_mpmath(op: Operation) -> None:
    # reference: mpmath at 60 digits; correctly rounded operations within 0.5 ulp (IEEE 754-2019), exact ones exact
    for p in points(op):
        mine = float(op.f64(*(np.array([x]) for x in p))[0])
        assert within_ulps(mine, mp_value(op, p), op.rounding.ulps), (p, mine, mp_value(op, p))


@pytest.mark.parametrize("op", RECORDS, ids=ids)
def test_evaluation_in_a_format_is_within_the_stated_ulps_of_that_format(op: Operation) -> None:
    # reference: mpmath at 60 digits on the binary32-rounded inputs, in binary32's ulps (np.spacing of float32)
    for p in points(op):
        p32 = tuple(float(np.float32(x)) for x in p)
        exact = mp_value(op, p32)
        if not (mpmath.isfinite(exact) and (exact == 0 or BINARY32.smallest_normal <= abs(exact) <= BINARY32.largest)):
            continue  # outside binary32's normal range
        out = op.evaluate(BINARY32, *(np.array([x]) for x in p32))
        assert out.dtype == np.float32
        ulp32 = mpmath.mpf(float(np.spacing(np.float32(abs(exact)))))
        assert abs(mpmath.mpf(float(out[0])) - exact) <= op.rounding.ulps * ulp32, (p32, out[0], exact)
        assert op.evaluate(BINARY64, *(np.array([x]) for x in p))[0] == op.f64(*(np.array([x]) for x in p))[0]
    # bfloat16 through ml_dtypes' own arithmetic (its ufunc loops): the same values as the record gives
    import ml_dtypes

    ones = [np.array([1.5]) for _ in range(op.arity)]
    with np.errstate(all="ignore"):
        expected = np.asarray(op.ufunc(*(a.astype(ml_dtypes.bfloat16) for a in ones))).astype(ml_dtypes.bfloat16)
        got = op.evaluate(BFLOAT16, *ones)
    assert got.dtype == np.dtype(ml_dtypes.bfloat16) and np.array_equal(got, expected, equal_nan=True)


def test_evaluation_in_binary32_matches_numpy_float32() -> None:
    # reference: numpy's own float32 loops (np.sqrt on a float32 array)
    x = np.array([2.0, 3.0, 0.1], dtype=np.float32)
    assert np.array_equal(OPERATIONS["sqrt"].evaluate(BINARY32, x), np.sqrt(x))
    assert OPERATIONS["add"].evaluate(BINARY32, [1.0], [2.0**-30])[0] == 1.0  # 2**-30 is below float32's half ulp


@pytest.mark.parametrize("op", RECORDS, ids=ids)
def test_partial_derivatives_agree_with_mpmath_diff(op: Operation) -> None:
    # reference: mpmath.diff (numerical differentiation) at 60 digits; binary64 constants inside a partial
    # (2/√π in erf's) limit the agreement to about 1e-15
    for p in points(op):
        with mpmath.workdps(DPS):
            args = [np.array([mpmath.mpf(x)], dtype=object) for x in p]
            out = op.mp(*args)
            mine = op.partials(MP_BACKEND, args, out)
            for j in range(op.arity):
                def along(t: mpmath.mpf, j: int = j) -> mpmath.mpf:
                    moved = [np.array([t], dtype=object) if i == j else a for i, a in enumerate(args)]
                    return op.mp(*moved)[0]

                theirs = mpmath.diff(along, args[j][0])
                if not (isinstance(theirs, mpmath.mpf) and mpmath.isfinite(theirs)):
                    continue  # no real derivative there (a negative base's power, along its exponent)
                if abs(mpmath.diff(along, args[j][0], direction=1) - mpmath.diff(along, args[j][0], direction=-1)) \
                        > mpmath.mpf(10) ** -20 * max(abs(theirs), 1):
                    continue  # not differentiable there (floor at an integer, max at a tie)
                got = mine[j][0] if isinstance(mine[j], np.ndarray) else mine[j]
                assert abs(got - theirs) <= mpmath.mpf(1e-14) * max(abs(theirs), 1), (p, j, got, theirs)


def _sympy_number(expr: sp.Expr) -> sp.Expr:
    value = expr.evalf(DPS)
    for target in (sp.Pow, sp.log, sp.exp):  # sympy.codegen's named functions evaluate through their rewrites
        if value.is_Number:
            break
        value = expr.rewrite(target).evalf(DPS)
    return value


@pytest.mark.parametrize("op", RECORDS, ids=ids)
def test_sympy_forms_agree_with_mpmath(op: Operation) -> None:
    # reference: sympy's own evaluation at 60 digits against mpmath's
    forms = [op.sympy_form(sp)] + ([op.sympy_form(sp, named=True)] if op.sympy_named else [])
    for p in points(op):
        exact = mp_value(op, p)
        for form in forms:
            value = _sympy_number(form(*(sp.Rational(x) for x in p)))  # the exact binary64 inputs
            assert value.is_Number, (p, value)
            with mpmath.workdps(DPS):
                assert abs(mpmath.mpf(str(value)) - exact) <= mpmath.mpf(10) ** -50 * max(abs(exact), 1), (p, value)


SOURCE = """
import math
import numpy as np
import scipy.special as sc
from scipy import special
"""


def _spelling_cases() -> list[tuple[str, str, str]]:
    return [(op.id, module, name) for op in RECORDS for module, spelled in op.spellings.by_module().items()
            for name in spelled]


@pytest.mark.parametrize("fid, module, name", _spelling_cases())
def test_every_spelling_resolves_back_to_its_record(fid: str, module: str, name: str) -> None:
    # reference: the real module has the name (numpy, math, scipy.special, builtins)
    assert callable(getattr(MODULES[module], name))
    local = f"alias_{name}"
    calls = {"math": [f"math.{name}(x)", f"{local}(x)"], "numpy": [f"np.{name}(x)", f"{local}(x)"],
             "scipy.special": [f"sc.{name}(x)", f"special.{name}(x)", f"{local}(x)"], "builtins": [f"{name}(x)"]}
    imports = SOURCE + ("" if module == "builtins" else f"from {module} import {name} as {local}\n")
    names = Names.of_module(ast.parse(imports))
    for call in calls[module]:
        func = ast.parse(call, mode="eval").body.func  # type: ignore[attr-defined]
        assert names.function(func) == fid, call
    star = Names.of_module(ast.parse(f"from {module} import *")) if module != "builtins" else names
    assert star.function(ast.Name(name)) == fid


@pytest.mark.parametrize("op", [op for op in RECORDS if op.generated], ids=ids)
def test_generated_spellings_parse_compute_the_operation_and_read_back(op: Operation) -> None:
    # reference: the generated call, evaluated by the real module, equals the record's binary64 evaluation
    tree = ast.parse("import math\nimport numpy as np\nimport scipy.special as sc\n")
    for module, name in op.generated.items():
        fn = getattr(MODULES[module], name)
        for p in points(op)[:5]:
            assert within_ulps(float(op.f64(*(np.array([x]) for x in p))[0]), mpmath.mpf(float(fn(*p))),
                               2 * op.rounding.ulps)
        if module == "builtins":
            continue
        text = Spelling(Style.of(tree), module, False).function(op.id)
        call = ast.parse(f"{text}({', '.join('xyz'[:op.arity])})", mode="eval").body
        assert Names.of_module(tree).function(call.func) == op.id  # type: ignore[attr-defined]


def test_a_new_operation_is_one_record(monkeypatch: pytest.MonkeyPatch) -> None:
    """Registering a record is all it takes: the reader spells it, the analysis evaluates and differentiates it,
    sympy forms it, generated code spells it."""
    cube = Operation("cube", "the cube", UNARY, quiet(lambda x: x * x * x), lambda a: a * a * a,
                     lambda B, a, o: (3.0 * a[0] * a[0],), sympy=lambda s: lambda a: a**3,
                     spellings=Spellings(numpy=("cube_of",)), generated={"numpy": "cube_of"})
    monkeypatch.setitem(OPERATIONS, "cube", cube)
    monkeypatch.setattr(names_module, "FUNCTION_SPELLINGS", names_module.function_spellings(OPERATIONS))
    src = "import numpy as np\ndef f(x):  # condhint: 1 <= x <= 2\n    return np.cube_of(x)\n"
    (site,) = analyse_module(src, "t.py", Config(), cache=None).sites
    assert site.root.kind == "cube"
    assert analyse(site, Config()).kappa == pytest.approx(3.0, rel=1e-12)  # κ of x**3 is 3 (references.md)
    expr, symbols = to_sympy(site.root)
    assert expr == symbols["x"] ** 3
    assert Spelling(Style.of(ast.parse(src)), "numpy", False).function("cube") == "np.cube_of"
