"""Which names in a module denote known elementary functions and constants.

Spellings come from the operation records (`numeric.operations`); imports (`import numpy as np`,
`from math import sqrt as s`, `from numpy import *`) map local names onto them. Nothing is imported or evaluated.
"""
from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field
from typing import Mapping

from condhint.numeric.operation import Operation
from condhint.numeric.operations import OPERATIONS

# Spellings the reader handles itself: conversions to binary64 and numpy's elementwise choice (not operations).
_READER_SPELLINGS: dict[str, dict[str, str]] = {
    "numpy": {"float64": "float", "double": "float", "where": "where"}, "builtins": {"float": "float"},
}


def function_spellings(operations: Mapping[str, Operation]) -> dict[str, dict[str, str]]:
    """Module -> local spelling -> operation id: a view of the operation records' spellings."""
    table: dict[str, dict[str, str]] = {}
    for op in operations.values():
        for module, spelled in op.spellings.by_module().items():
            for name in spelled:
                table.setdefault(module, {})[name] = op.id
    for module, extra in _READER_SPELLINGS.items():
        table.setdefault(module, {}).update(extra)
    return table


FUNCTION_SPELLINGS: dict[str, dict[str, str]] = function_spellings(OPERATIONS)

# Module -> name -> exact value text understood by the reference backend.
CONSTANTS: dict[str, dict[str, str]] = {
    "math": {"pi": "pi", "e": "e", "tau": "tau", "inf": "inf", "nan": "nan"},
    "numpy": {"pi": "pi", "e": "e", "inf": "inf", "nan": "nan", "euler_gamma": "euler_gamma", "Inf": "inf",
              "NaN": "nan"},
}
MODULE_ALIASES = {"np": "numpy", "numpy": "numpy", "math": "math", "scipy.special": "scipy.special"}
INT_BUILTINS = {"len", "int", "round", "ord"}
SYMBOL_CONSTRUCTORS = {"symbols", "Symbol", "Dummy", "Wild", "var", "Function", "IndexedBase", "MatrixSymbol",
                       "Idx", "sympify", "S", "Integer", "Rational", "Matrix",
                       # polynomial rings and fields, and exact domain elements (QQ(1, 3))
                       "ring", "xring", "vring", "sring", "field", "xfield", "vfield", "sfield", "puiseux_ring",
                       "PolyRing", "FracField", "QQ", "ZZ"}
# mpmath numbers carry their own precision and an unbounded exponent: not binary64 either.
MPMATH_CONSTRUCTORS = {"mpf", "mpc", "mpi", "mpmathify", "convert", "matrix"}
# dtype names a from-import can bring in (`from numpy import float32`); `reading.dtypes` reads what they mean.
_DTYPES = {"float64", "double", "float32", "single", "float16", "half", "bfloat16", "float_"}
# Calls that make a binary64 number from a literal: `np.float64(2)`, `np.double("0.25")`.
NUMBER_CONSTRUCTORS = {"float64", "double"}


@dataclass
class Names:
    """The module aliases and imported names in force in a file."""

    modules: dict[str, str] = field(default_factory=dict)  # local name -> module ("np" -> "numpy")
    functions: dict[str, str] = field(default_factory=dict)  # local name -> function id
    dtype_names: dict[str, str] = field(default_factory=dict)  # local name -> dtype (`from numpy import float32`)
    function_modules: dict[str, str] = field(default_factory=dict)  # from-imported function -> its module
    constants: dict[str, str] = field(default_factory=dict)  # local name -> exact value text
    # How the file spells each function, for code generation: function id -> (module, local alias or None)
    shadowed: set[str] = field(default_factory=set)
    symbolic: set[str] = field(default_factory=set)  # names that hold sympy symbols (`from sympy.abc import x`)
    uses_sympy: bool = False
    uses_mpmath: bool = False

    @classmethod
    def of_module(cls, tree: ast.Module) -> "Names":
        return cls.merged([cls.of_statements(tree.body)])

    @classmethod
    def merged(cls, parts: list["Names"]) -> "Names":
        """The names in force in a module read in parts (in order): builtins first, definitions shadow."""
        names = cls()
        names.functions.update(FUNCTION_SPELLINGS["builtins"])
        for part in parts:
            names.modules.update(part.modules)
            names.dtype_names.update(part.dtype_names)
            names.function_modules.update(part.function_modules)
            names.functions.update(part.functions)
            names.constants.update(part.constants)
            names.shadowed |= part.shadowed
            names.symbolic |= part.symbolic
            names.uses_sympy |= part.uses_sympy
            names.uses_mpmath |= part.uses_mpmath
        for name in names.shadowed:
            names.functions.pop(name, None)
            names.constants.pop(name, None)
        return names

    @classmethod
    def of_statements(cls, statements: list[ast.stmt]) -> "Names":
        """What some statements import and define (every level inside them), before merging."""
        names = cls()
        for stmt in statements:
            for node in ast.walk(stmt):
                if isinstance(node, (ast.Import, ast.ImportFrom)):
                    names._read_import(node)
                elif isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                    names.shadowed.add(node.name)
        return names

    def _read_import(self, node: ast.Import | ast.ImportFrom) -> None:
        mods = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
        if any(m == "mpmath" or m.startswith("mpmath.") for m in mods):
            self.uses_mpmath = True
        if any(m == "sympy" or m.startswith("sympy.") for m in mods):
            self.uses_sympy = True
            if isinstance(node, ast.ImportFrom) and node.module == "sympy.abc":
                self.symbolic.update(a.asname or a.name for a in node.names)
        if isinstance(node, ast.Import):
            for alias in node.names:
                mod = alias.name
                if mod in ("math", "numpy", "scipy.special", "cmath", "ml_dtypes"):
                    local = alias.asname or mod.split(".")[0]
                    self.modules[local] = "numpy" if mod == "numpy" else mod
                elif mod == "scipy" and alias.asname is None:
                    self.modules["scipy"] = "scipy"
            return
        if not node.module or node.level != 0:
            return
        mod = node.module
        if mod == "scipy":
            for alias in node.names:
                if alias.name == "special":
                    self.modules[alias.asname or "special"] = "scipy.special"
            return
        if mod in ("numpy", "ml_dtypes"):
            self.dtype_names.update({a.asname or a.name: a.name for a in node.names if a.name in _DTYPES})
        if mod not in FUNCTION_SPELLINGS:
            return
        spell, consts = FUNCTION_SPELLINGS[mod], CONSTANTS.get(mod, {})
        for alias in node.names:
            if alias.name == "*":
                self.functions.update({k: v for k, v in spell.items() if v})
                self.function_modules.update({k: mod for k, v in spell.items() if v})
                self.constants.update(consts)
                continue
            local = alias.asname or alias.name
            if spell.get(alias.name):
                self.functions[local] = spell[alias.name]
                self.function_modules[local] = mod
            elif alias.name in consts:
                self.constants[local] = consts[alias.name]

    def not_binary64(self, value: ast.expr) -> bool:
        """`symbols("x y")`, `sp.Symbol("x")`, `QQ(1, 3)` in a file that imports sympy, `mpf(2)` in one that
        imports mpmath: objects whose arithmetic is exact, symbolic or of another precision and range."""
        if not isinstance(value, ast.Call):
            return False
        name = _callee(value)
        return (self.uses_sympy and name in SYMBOL_CONSTRUCTORS) or (self.uses_mpmath and name in MPMATH_CONSTRUCTORS)

    def makes_number(self, call: ast.Call) -> bool:
        """`np.float64(5)`, `np.float64("0.25")`: one literal argument turned into a binary64 number."""
        return (_callee(call) in NUMBER_CONSTRUCTORS and _callee(call) not in self.shadowed and len(call.args) == 1
                and not call.keywords and literal_number(call.args[0]) is not None)

    def _module_of(self, expr: ast.expr) -> str | None:
        if isinstance(expr, ast.Name):
            return self.modules.get(expr.id)
        if isinstance(expr, ast.Attribute) and isinstance(expr.value, ast.Name):
            base = self.modules.get(expr.value.id)
            if base == "scipy" and expr.attr == "special":
                return "scipy.special"
        return None

    def function(self, func: ast.expr) -> str | None:
        """The function id a callee expression denotes, or None."""
        if isinstance(func, ast.Name):
            return self.functions.get(func.id)
        if isinstance(func, ast.Attribute):
            mod = self._module_of(func.value)
            if mod is not None:
                return FUNCTION_SPELLINGS.get(mod, {}).get(func.attr) or None
        return None

    def module_of_call(self, func: ast.expr) -> str | None:
        """The module a known function's call goes to (`math`, `numpy`, `scipy.special`, `builtins`)."""
        if isinstance(func, ast.Name):
            return self.function_modules.get(func.id, "builtins" if func.id in self.functions else None)
        if isinstance(func, ast.Attribute):
            return self._module_of(func.value)
        return None

    def constant(self, expr: ast.expr) -> str | None:
        """The exact-value text a name or attribute denotes (`math.pi` -> "pi"), or None."""
        if isinstance(expr, ast.Name):
            return self.constants.get(expr.id)
        if isinstance(expr, ast.Attribute):
            mod = self._module_of(expr.value)
            if mod is not None:
                return CONSTANTS.get(mod, {}).get(expr.attr)
        return None

    def spelling(self, fn_id: str) -> tuple[str, str | None]:
        """How this file would spell a call of `fn_id`: (prefix text, import to add or None)."""
        for local, fid in self.functions.items():
            if fid == fn_id and local not in FUNCTION_SPELLINGS["builtins"]:
                return local, None
        for local, mod in sorted(self.modules.items(), key=lambda kv: kv[1] != "numpy"):
            for attr, fid in FUNCTION_SPELLINGS.get(mod, {}).items():
                if fid == fn_id and mod in ("numpy", "math"):
                    return f"{local}.{attr}", None
        return "", None


def _callee(call: ast.Call) -> str:
    f = call.func
    return f.id if isinstance(f, ast.Name) else f.attr if isinstance(f, ast.Attribute) else ""


def literal_number(e: ast.expr) -> str | None:
    """The exact text of a numeric literal (`5`, `-0.1`, `"0.1"`), or None."""
    sign = ""
    if isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub):
        sign, e = "-", e.operand
    if isinstance(e, ast.Constant) and not isinstance(e.value, bool) and isinstance(e.value, (int, float, str)):
        text = str(e.value).strip()
        try:
            value = float(text)
        except ValueError:
            return None
        return sign + text if math.isfinite(value) else None
    return None
