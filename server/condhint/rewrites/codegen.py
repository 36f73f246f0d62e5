"""Python text for a candidate DAG, in the style of the file it goes into.

- functions are spelled the way the file already spells them: `np.expm1` under `import numpy as np`,
  `expm1` when the site calls bare names from `from math import …` (the name is added to that line),
  `math.expm1` otherwise (adding `import math` if needed); a name that would clash is never imported;
- original sub-expressions keep their text, and names bound on earlier lines are written as those names;
- parentheses only where Python's precedence (or the DAG's evaluation order) needs them;
- an unknown call among the inputs is never written more often than the original writes it.
"""
from __future__ import annotations

import ast
from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable

from condhint.expr import COMPARE, CONST, INPUT, SELECT, Node, topological
from condhint.numeric.formats import BINARY64
from condhint.numeric.operations import OPERATIONS
from condhint.rewrites import dag

if TYPE_CHECKING:
    from condhint.expr import Span
    from condhint.reading.source import Source

# Python precedence levels (higher binds tighter).
SELECT_P, COMPARE_P, ADD_P, MUL_P, UNARY_P, POW_P, ATOM_P = 1, 6, 11, 12, 13, 14, 16
_BINOP_P = {ast.Add: ADD_P, ast.Sub: ADD_P, ast.Mult: MUL_P, ast.Div: MUL_P, ast.FloorDiv: MUL_P, ast.Mod: MUL_P,
            ast.MatMult: MUL_P, ast.Pow: POW_P, ast.BitOr: 7, ast.BitXor: 8, ast.BitAnd: 9, ast.LShift: 10,
            ast.RShift: 10}
_OPS = {"add": (" + ", ADD_P), "sub": (" - ", ADD_P), "mul": (" * ", MUL_P), "div": (" / ", MUL_P)}

CONSTANT_NAMES = {"pi", "e", "tau", "inf"}


class Unspellable(Exception):
    """The candidate needs something this file cannot say without a new third-party import, or would repeat
    a call with possible side effects."""


def precedence(text: str) -> int:
    """How tightly an expression's text binds, from its syntax tree (multi-line text is parenthesised)."""
    tree = ast.parse(text.strip(), mode="eval").body
    if isinstance(tree, ast.BinOp):
        return _BINOP_P[type(tree.op)]
    if isinstance(tree, ast.UnaryOp):
        return 4 if isinstance(tree.op, ast.Not) else UNARY_P
    if isinstance(tree, ast.Compare):
        return COMPARE_P
    if isinstance(tree, ast.BoolOp):
        return 3 if isinstance(tree.op, ast.And) else 2
    if isinstance(tree, ast.IfExp):
        return SELECT_P
    if isinstance(tree, (ast.Lambda, ast.NamedExpr)):
        return 0
    return ATOM_P


def needed_by(parent: ast.AST, child: ast.AST) -> int:
    """The least precedence an expression needs to stand unparenthesised as this child of `parent`."""
    if isinstance(parent, ast.BinOp):
        p = _BINOP_P[type(parent.op)]
        if isinstance(parent.op, ast.Pow):
            return POW_P + 1 if child is parent.left else UNARY_P
        return p if child is parent.left else p + 1
    if isinstance(parent, ast.UnaryOp):
        return 5 if isinstance(parent.op, ast.Not) else UNARY_P
    if isinstance(parent, ast.Compare):
        return COMPARE_P + 1
    if isinstance(parent, ast.BoolOp):
        return (4 if isinstance(parent.op, ast.And) else 3)
    if isinstance(parent, ast.IfExp):
        return SELECT_P if child is parent.orelse else SELECT_P + 1
    if isinstance(parent, (ast.Attribute, ast.Await)) or (isinstance(parent, ast.Call) and child is parent.func) or (
            isinstance(parent, ast.Subscript) and child is parent.value):
        return ATOM_P
    return SELECT_P


_PLACES: dict[int, tuple[ast.Module, dict]] = {}


def place(tree: ast.Module, source: "Source", span: "Span") -> int | None:
    """The precedence needed where the expression with this span stands in the tree (None if not found)."""
    hit = _PLACES.get(id(tree))
    if hit is None or hit[0] is not tree:
        index: dict = {}
        for parent in ast.walk(tree):
            for child in ast.iter_child_nodes(parent):
                if isinstance(child, ast.expr):
                    index.setdefault(source.span(child), (parent, child))
        if len(_PLACES) > 8:
            _PLACES.clear()
        _PLACES[id(tree)] = hit = (tree, index)
    found = hit[1].get(span)
    return None if found is None else needed_by(*found)


def _decided(node: Node, cond: Node, side: int) -> Node:
    """`node` with every choice on the test `cond` replaced by its branch `side` (1: taken, 2: not taken)."""
    for sel in [n for n in topological(node) if n.kind == SELECT and dag.same(n.args[0], cond)]:
        node = dag.substitute(node, sel, sel.args[side], by_key=True)
    return node


def is_expression(text: str, bracketed: bool = False) -> bool:
    """Whether `text` reads as one expression; with `bracketed`, also one continued over lines inside the
    brackets around it (a place to replace; text reused inside a fix must read alone)."""
    for t in (text.strip(), *((f"({text.strip()})",) if bracketed else ())):
        try:
            ast.parse(t, mode="eval")
            return True
        except SyntaxError:
            continue
    return False


MODULES = ("math", "numpy", "scipy.special")  # the modules whose functions fixes spell


@dataclass
class Style:
    """A module's imports, read from its syntax tree."""

    aliases: dict[str, str] = field(default_factory=dict)  # module -> local alias (`import numpy as np`)
    alias_module: dict[str, str] = field(default_factory=dict)  # local alias -> module
    from_imports: dict[str, dict[str, str]] = field(default_factory=dict)  # module -> attr -> local name
    local_module: dict[str, str] = field(default_factory=dict)  # bare local name -> module
    bound: set[str] = field(default_factory=set)  # names bound other than by these imports

    @classmethod
    def of(cls, tree: ast.Module) -> "Style":
        s = cls()
        for node in ast.walk(tree):
            if isinstance(node, ast.Import) or (isinstance(node, ast.ImportFrom) and node.level == 0 and
                                                 node.module == "scipy" and any(a.name == "special" for a in node.names)):
                for a in node.names:
                    full = f"{node.module}.{a.name}" if isinstance(node, ast.ImportFrom) else a.name
                    mod = full if full in MODULES else None
                    if mod is not None:
                        s.aliases.setdefault(mod, a.asname or a.name)
                        s.alias_module[a.asname or a.name] = mod
                    else:
                        s.bound.add((a.asname or a.name).split(".")[0])
            elif isinstance(node, ast.ImportFrom):
                mod = node.module if node.module in MODULES and node.level == 0 else None
                for a in node.names:
                    local = a.asname or a.name
                    if mod is not None and a.name != "*":
                        s.from_imports.setdefault(mod, {})[a.name] = local
                        s.local_module[local] = mod
                    else:
                        s.bound.add(local)
            elif isinstance(node, ast.Name) and isinstance(node.ctx, (ast.Store, ast.Del)):
                s.bound.add(node.id)
            elif isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                s.bound.add(node.name)
            elif isinstance(node, ast.arg):
                s.bound.add(node.arg)
        return s


class Spelling:
    """How one site spells functions; collects the import statements the spellings need."""

    def __init__(self, style: Style, module: str, from_style: bool, narrow: bool = False,
                 also: tuple[str, ...] = ()) -> None:
        self.style = style
        self.module = module
        self.from_style = from_style
        self.narrow = narrow  # only numpy's functions keep the site's format
        self.also = also  # the other modules the site calls, imported as modules: they take its values
        self.imports: list[str] = []

    @classmethod
    def for_site(cls, style: Style, nodes: list[Node]) -> "Spelling":
        """The module and import style the site's own calls use (the file's imports when it calls none); numpy
        where the site computes in a reduced format (`math` would compute in binary64 and return a Python float)."""
        if any(n.format is not BINARY64 for n in nodes):
            if "numpy" not in style.aliases and "numpy" not in style.from_imports:
                raise Unspellable("a reduced-format fix needs numpy, which this file does not import")
            return cls(style, "numpy", "numpy" in style.from_imports and "numpy" not in style.aliases, narrow=True)
        seen: Counter[tuple[str, bool]] = Counter()
        for node in nodes:
            if node.kind in OPERATIONS and node.kind not in _OPS and "(" in node.text and node.text.endswith(")"):
                callee = node.text[: node.text.index("(")].strip()
                if "." in callee:
                    mod = style.alias_module.get(callee.rsplit(".", 1)[0])
                    if mod:
                        seen[(mod, False)] += 1
                elif callee in style.local_module:
                    seen[(style.local_module[callee], True)] += 1
        if seen:
            (module, from_style), _ = seen.most_common(1)[0]
            also = tuple(m for (m, local), _ in seen.most_common() if m != module and not local)
            return cls(style, module, from_style, also=also)
        module = "numpy" if "numpy" in style.aliases and "math" not in style.aliases and \
            "math" not in style.from_imports else "math"
        from_style = module in style.from_imports and module not in style.aliases
        return cls(style, module, from_style)

    @property
    def array_style(self) -> bool:
        """numpy's and scipy.special's functions take arrays: choices there are `where`, never `if`."""
        return self.module in ("numpy", "scipy.special")

    def _need(self, statement: str) -> None:
        if statement not in self.imports:
            self.imports.append(statement)

    def function(self, fid: str) -> str:
        generated = OPERATIONS[fid].generated  # the record's spelling per module
        builtin = generated.get("builtins")
        if builtin is not None and not (self.array_style and "numpy" in generated):
            return builtin
        # array code may pass arrays, which `math` cannot take: only scalar code falls back to math
        fallback = () if self.narrow else ("numpy",) if self.array_style else ("numpy", "math")
        for mod in dict.fromkeys((self.module, *self.also, *fallback)):
            attr = generated.get(mod)
            if attr is None:
                continue
            if mod == self.module and self.from_style:
                local = self.style.from_imports.get(mod, {}).get(attr)
                if local is not None:
                    return local
                if attr not in self.style.bound and attr not in self.style.local_module:
                    self._need(f"from {mod} import {attr}")
                    return attr
            alias = self.style.aliases.get(mod)
            if alias is not None:
                return f"{alias}.{attr}"
            local = self.style.from_imports.get(mod, {}).get(attr)
            if local is not None:
                return local
            if mod == "math" and "math" not in self.style.bound and "math" not in self.style.local_module:
                self._need("import math")
                return f"math.{attr}"
        raise Unspellable(f"no spelling of {fid} in this file")

    def where(self) -> str:
        """numpy's elementwise choice, for piecewise rewrites of array code."""
        alias = self.style.aliases.get("numpy")
        if alias is not None:
            return f"{alias}.where"
        local = self.style.from_imports.get("numpy", {}).get("where")
        if local is not None:
            return local
        raise Unspellable("np.where without numpy")

    def constructor(self, dtype: str) -> str:
        """numpy's scalar type of a format (`np.float32`), as this file spells it."""
        alias = self.style.aliases.get("numpy")
        if alias is not None and dtype in ("float64", "float32", "float16"):
            return f"{alias}.{dtype}"
        raise Unspellable(f"no spelling of {dtype} in this file")

    def constant(self, name: str) -> str:
        mod = self.module
        local = self.style.from_imports.get(mod, {}).get(name)
        if local is not None:
            return local
        alias = self.style.aliases.get(mod) or self.style.aliases.get("math")
        if alias is None:
            self._need("import math")
            alias = "math"
        return f"{alias}.{name}"


class Emitter:
    """Writes a DAG as Python source. `reuse(node)` gives the original text of an untouched node (or None);
    `names` maps nodes to the names they are bound to where the code is edited."""

    def __init__(self, spelling: Spelling, reuse: Callable[[Node], str | None], names: dict[int, str],
                 rebound: set[str] | frozenset[str] = frozenset()) -> None:
        self.spelling = spelling
        self.reuse = reuse
        self.names = names
        self.rebound = rebound  # names that no longer hold the inputs spelled with them (see writer)

    def text(self, node: Node) -> tuple[str, int]:
        return self._emit(node)

    def _emit(self, node: Node) -> tuple[str, int]:
        if id(node) in self.names:
            return self.names[id(node)], ATOM_P
        original = self.reuse(node)
        if original is not None:
            return _wrapped(original)
        if node.kind == INPUT:
            text = node.text or node.name or ""
            if text in self.rebound or text.split("[")[0] + "[" in self.rebound:
                raise Unspellable(f"`{text}` holds another value here than the one the fix needs")
            return _wrapped(text)
        if node.kind == CONST:
            return self._const(node)
        if node.kind in _OPS:
            sym, p = _OPS[node.kind]
            (ta, pa), (tb, pb) = self._emit(node.args[0]), self._emit(node.args[1])
            return f"{_par(ta, pa < p)}{sym}{_par(tb, pb <= p)}", p
        if node.kind == "pow":
            (ta, pa), (tb, pb) = self._emit(node.args[0]), self._emit(node.args[1])
            return f"{_par(ta, pa <= POW_P)} ** {_par(tb, pb < UNARY_P)}", POW_P
        if node.kind == "neg":
            ta, pa = self._emit(node.args[0])
            return f"-{_par(ta, pa < UNARY_P or ta.startswith('-'))}", UNARY_P
        if node.kind == "square":
            ta, pa = self._emit(node.args[0])
            return f"{_par(ta, pa <= POW_P)} ** 2", POW_P
        if node.kind == "reciprocal":
            ta, pa = self._emit(node.args[0])
            return f"1 / {_par(ta, pa <= MUL_P)}", MUL_P
        if node.kind == "cast":
            return self._cast(node)
        if node.kind == COMPARE:
            (ta, pa), (tb, pb) = self._emit(node.args[0]), self._emit(node.args[1])
            return f"{_par(ta, pa <= COMPARE_P)} {node.name} {_par(tb, pb <= COMPARE_P)}", COMPARE_P
        if node.kind == SELECT:
            if self.spelling.array_style:
                c, a, b = (self._emit(x) for x in node.args)
                return f"{self.spelling.where()}({c[0]}, {a[0]}, {b[0]})", ATOM_P
            cond, taken, other = node.args  # Python evaluates one branch: a choice on the same test inside is made
            c, a, b = (self._emit(x) for x in (cond, _decided(taken, cond, 1), _decided(other, cond, 2)))
            return f"{_par(a[0], a[1] <= SELECT_P)} if {_par(c[0], c[1] <= SELECT_P)} else {b[0]}", SELECT_P
        if node.kind in OPERATIONS:
            name = self.spelling.function(node.kind)
            args = ", ".join(_par(t, p < SELECT_P) for t, p in (self._emit(a) for a in self._folded(node)))
            return f"{name}({args})", ATOM_P
        raise Unspellable(f"cannot write {node.kind}")

    def _folded(self, node: Node) -> list[Node]:
        """The arguments of a call, a rule-built nest of a variadic function unfolded where it is not numpy's
        (`math.hypot(x, y, z)`, `max(a, b, c)`; numpy's hypot and maximum take two)."""
        first = node.args[0]
        if self.spelling.array_style or not OPERATIONS[node.kind].signature.folds or first.kind != node.kind or \
                id(first) in self.names or self.reuse(first) is not None:
            return list(node.args)
        return self._folded(first) + list(node.args[1:])

    def _cast(self, node: Node) -> tuple[str, int]:
        """A conversion: implicit for a Python number (numpy converts it where it meets the other operand),
        else written as numpy's constructor of the format (`np.float32(…)`)."""
        inner, p = self._emit(node.args[0])
        if node.args[0].weak or node.args[0].is_int:
            return inner, p
        return f"{self.spelling.constructor(node.format.short)}({inner})", ATOM_P

    def _const(self, node: Node) -> tuple[str, int]:
        if node.text and is_expression(node.text):
            return _wrapped(node.text)
        exact = node.exact or repr(node.value)
        core = exact.lstrip("-")
        negative = exact.startswith("-")
        if core in CONSTANT_NAMES:
            text = self.spelling.constant(core)
        elif "/" in core:
            num, den = core.split("/")
            d = int(den)
            if d & (d - 1) == 0:
                text = repr(int(num) / d)
            else:
                return (f"-{num} / {den}" if negative else f"{num} / {den}"), MUL_P
        else:
            text = core
        return (f"-{text}", UNARY_P) if negative else (text, ATOM_P)


def _wrapped(text: str) -> tuple[str, int]:
    if "\n" in text:
        return f"({text})", ATOM_P
    return text, precedence(text)


def _par(text: str, needed: bool) -> str:
    return f"({text})" if needed else text


def call_inputs(root: Node) -> list[str]:
    """Texts of inputs that are calls of unknown functions (they may have side effects)."""
    out = []
    for n in topological(root):
        if n.kind == INPUT and n.text and "(" in n.text:
            try:
                tree = ast.parse(n.text, mode="eval")
            except SyntaxError:
                continue
            if any(isinstance(x, ast.Call) for x in ast.walk(tree)):
                out.append(n.text)
    return out


def check_side_effects(original_text: str, replacement: str, root: Node) -> None:
    """Refuse a replacement that writes an unknown call more often than the original does."""
    for text in call_inputs(root):
        if replacement.count(text) > original_text.count(text):
            raise Unspellable(f"the rewrite would call {text} more than once")
