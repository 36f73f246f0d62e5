"""The module index: everything read once per text and shared by the command line, the language server and
the rewrites — the syntax tree, imports and aliases, module constants, `# condhint:` comments, and the units
analysed one at a time (the module-level code, each top-level definition) with the definitions each calls.

A text that does not parse can still be indexed (`tolerant=True`, the editor's case): top-level definitions
and module-level statements that do not parse on their own are blanked, line numbers kept, and the rest is
read as usual. Nothing is executed.
"""
from __future__ import annotations

import ast
import hashlib
import re
import warnings
from collections import OrderedDict
from dataclasses import dataclass, replace
from functools import cached_property
from pathlib import Path

from condhint.expr import Node, Span
from condhint.reading.comments import Clauses, find_comments
from condhint.reading.imported import load
from condhint.reading.names import Names
from condhint.reading.source import Source
from condhint.reading.targets import DEFS

MODULE = "<module>"
_RELATIVE = re.compile(r"^\s*from\s+\.", re.M)
_REDUCED = re.compile(r"float32|float16|bfloat16|single|half|['\"]f[24]['\"]")
_TOP_LEVEL_DEF = re.compile(r"^(?:@|def\s|async\s+def\s|class\s)")
_NEWLINE = re.compile(r"\r\n|\r|\n")


@dataclass(frozen=True)
class SyntaxProblem:
    """Why a text does not parse, and where."""

    span: Span
    message: str
    syntax: bool = True  # a syntax error (the rest of the text can be read); else the text cannot be read at all


@dataclass(frozen=True)
class Unit:
    """A part of a module analysed on its own: the module-level code, or one top-level definition (its
    decorators belong to the module-level code, which evaluates them)."""

    name: str  # MODULE, or the definition's name
    start: int  # first and last line (1-based, inclusive); the module-level code spans the whole text
    end: int

    @property
    def is_module(self) -> bool:
        return self.name == MODULE and self.start == 1

    def owns(self, line: int) -> bool:
        return self.start <= line <= self.end


@dataclass(frozen=True)
class UnitFacts:
    """What one unit says about the whole module, memoised by the unit's text (an edit elsewhere reuses it)."""

    names: Names  # what it imports and defines (not merged: see `Names.merged`)
    globals: frozenset[str]  # names it declares `global` or `nonlocal`
    called: frozenset[str]  # names it calls (`f(…)`)
    comments: tuple[Clauses, ...]  # its `# condhint:` comments, lines counted from the unit's first line


class ModuleIndex:
    """A text read once. The syntax tree can be released (`release`) and is parsed again when next needed, so
    an index kept by an editor for hover and fixes does not hold every version's tree."""

    def __init__(self, text: str, tree: ast.Module, problem: SyntaxProblem | None = None) -> None:
        self.text = text
        self.path = ""  # the file the text was read from ("" when unknown): package imports resolve from it
        self.imports: dict | None = None  # `reading.imported.imported_functions`, computed once when first needed
        self.source = Source(text)
        self.problem = problem  # tolerant reading: why the original text does not parse
        self._tree: ast.Module | None = tree
        self.units = _units(tree, len(self.source.lines))  # the module-level code first, then definitions
        facts = [unit_facts(self.unit_text(u), self._statements(u)) for u in self.units]
        self.facts = dict(zip(self.units, facts))
        self.names = Names.merged([f.names for f in facts])
        self.comments = [replace(c, line=c.line + u.start - 1) for u, f in zip(self.units, facts) for c in f.comments]
        self.comments.sort(key=lambda c: c.line)
        self.globals = frozenset().union(*(f.globals for f in facts))
        self.constants: dict[str, Node] = {}  # names bound once at module level to constants
        from condhint.reading.statements import module_constants  # the constants are read like any expression

        self.constants = module_constants(self)

    @property
    def tree(self) -> ast.Module:
        if self._tree is None:
            self._tree, _ = parse(self.text)  # the read text always parses
            self.__dict__.pop("_by_start", None)
        return self._tree  # type: ignore[return-value]

    def release(self) -> None:
        """Drop the syntax tree (it is parsed again when needed)."""
        self._tree = None
        self.__dict__.pop("_by_start", None)

    @cached_property
    def _by_start(self) -> dict[int, ast.stmt]:
        return {s.lineno: s for s in self.tree.body if isinstance(s, DEFS)}

    def statement(self, unit: Unit) -> ast.stmt | None:
        """A definition's statement (None for the module-level code)."""
        return None if unit.is_module else self._by_start.get(unit.start)

    def _statements(self, unit: Unit) -> list[ast.stmt]:
        if unit.is_module:
            return [s for s in self.tree.body if not isinstance(s, DEFS)]
        stmt = self.statement(unit)
        return [stmt] if stmt is not None else []

    @property
    def symbolic_numbers(self) -> bool:
        """Whether the module works with symbolic or multiprecision numbers: it imports sympy or mpmath, or it is
        a module of those packages themselves (relative imports from inside them). Its values are rarely binary64."""
        if self.names.uses_sympy or self.names.uses_mpmath:
            return True
        parts = set(re.split(r"[\\/]", self.path)[:-1])
        return bool(parts & {"sympy", "mpmath"}) and bool(_RELATIVE.search(self.text))

    @cached_property
    def mentions_reduced_formats(self) -> bool:
        """Whether the text spells a format narrower than binary64 (else every value is binary64)."""
        return bool(_REDUCED.search(self.text))

    @cached_property
    def walrus(self) -> bool:
        return ":=" in self.text  # otherwise no expression binds a name

    @cached_property
    def comment_at(self) -> dict[int, Clauses]:
        return {c.line: c for c in self.comments}

    def read_other(self, path: Path) -> "ModuleIndex | None":
        """The index of another file of the package (`reading.imported`), read from disk, never run."""
        return load(path, lambda text: read_module(text)[0])

    def unit_at(self, line: int) -> Unit:
        """The definition holding a line, else the module-level code."""
        return next((u for u in self.units[1:] if u.owns(line)), self.units[0])

    @cached_property
    def _definitions(self) -> dict[str, list[Unit]]:
        by_name: dict[str, list[Unit]] = {}
        for u in self.units[1:]:
            by_name.setdefault(u.name, []).append(u)
        return by_name

    @property
    def definitions(self) -> dict[str, list[Unit]]:
        """Top-level definitions by name (a name defined twice has two)."""
        return self._definitions

    def calls(self, unit: Unit) -> frozenset[str]:
        """The top-level definitions a unit calls by name."""
        return self.facts[unit].called & self._definitions.keys()

    def dependencies(self, unit: Unit) -> list[Unit]:
        """The top-level definitions `unit` calls, directly or through others (each once; recursion is fine)."""
        by_name = self._definitions
        out: list[Unit] = []
        todo = sorted(self.calls(unit))
        seen = {unit.name}
        while todo:
            name = todo.pop()
            if name in seen:
                continue
            seen.add(name)
            for u in by_name.get(name, []):
                out.append(u)
                todo.extend(sorted(self.calls(u)))
        return out

    def unit_text(self, unit: Unit) -> str:
        lines = self.source.lines
        if not unit.is_module:
            return "\n".join(lines[unit.start - 1:unit.end])
        out = list(lines)
        for u in self.units[1:]:
            out[u.start - 1:u.end] = [""] * (u.end - u.start + 1)
        return "\n".join(out)

    def focused_text(self, line: int) -> str:
        """The text with every top-level definition blanked but the one holding `line` (line numbers kept):
        what a change at `line` can affect, with the module-level code it reads."""
        lines = list(self.source.lines)
        keep = self.unit_at(line)
        for u in self.units[1:]:
            if u != keep:
                first = self.decorated_from(u)  # a decorator left without its definition would not parse
                lines[first - 1:u.end] = [""] * (u.end - first + 1)
        return "\n".join(lines)

    def decorated_from(self, unit: Unit) -> int:
        """The first line of a definition's decorators (its own first line when it has none)."""
        return min([unit.start, *(d.lineno for d in getattr(self.statement(unit), "decorator_list", []))])

    @cached_property
    def context_key(self) -> str:
        """What every unit reads from the rest of the module: names, aliases and module constants."""
        n = self.names
        parts = [sorted(n.modules.items()), sorted(n.functions.items()), sorted(n.constants.items()),
                 sorted(n.shadowed), sorted(n.symbolic), n.uses_sympy, n.uses_mpmath,
                 sorted((k, v.key()) for k, v in self.constants.items()), [u.name for u in self.units[1:]]]
        return repr(parts)

    def unit_key(self, unit: Unit, settings: str) -> str:
        """Equal keys mean equal analyses: the unit's text and place, the definitions it depends on, the
        module context and the settings."""
        h = hashlib.sha256()
        for part in (settings, self.context_key, f"{unit.name}:{unit.start}", self.unit_text(unit),
                     *(f"{d.name}:{self.unit_text(d)}" for d in self.dependencies(unit))):
            h.update(part.encode("utf-8", "surrogatepass"))
            h.update(b"\0")
        return h.hexdigest()


def parse(text: str) -> tuple[ast.Module | None, SyntaxProblem | None]:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return ast.parse(text), None
    except SyntaxError as exc:
        line = max(exc.lineno or 1, 1)
        col = max((exc.offset or 1) - 1, 0)
        return None, SyntaxProblem(Span(line, col, line, col + 1), f"syntax error: {exc.msg}")
    except (ValueError, RecursionError, MemoryError) as exc:
        if isinstance(exc, (RecursionError, MemoryError)):  # CPython's parser gives no text for some of these
            msg = "the file is nested too deeply for Python's parser (Python cannot compile it either)"
        else:
            msg = "the file contains null bytes" if "null" in str(exc) else f"the file cannot be parsed: {exc}"
        return None, SyntaxProblem(Span(1, 0, 1, 1), msg, syntax=False)


def read_module(text: str, tolerant: bool = False) -> tuple[ModuleIndex | None, SyntaxProblem | None]:
    """The index of a text, and why it does not parse (None when it does). Without `tolerant`, a text that
    does not parse has no index."""
    tree, problem = parse(text)
    read = text
    if tree is None and tolerant and problem is not None and problem.syntax:
        read = _parseable_part(text)
        tree, _ = parse(read)
    if tree is None:
        return None, problem
    return ModuleIndex(read, tree, problem), problem


def _units(tree: ast.Module, n_lines: int) -> list[Unit]:
    units = [Unit(MODULE, 1, max(n_lines, 1))]
    units += [Unit(s.name, s.lineno, s.end_lineno or s.lineno) for s in tree.body if isinstance(s, DEFS)]
    return units


_FACTS: OrderedDict[str, UnitFacts] = OrderedDict()
_FACTS_KEPT = 4096


def unit_facts(text: str, statements: list[ast.stmt]) -> UnitFacts:
    """The facts of a unit with this text and these statements (memoised by the text)."""
    hit = _FACTS.get(text)
    if hit is not None:
        _FACTS.move_to_end(text)
        return hit
    globals_: set[str] = set()
    called: set[str] = set()
    for stmt in statements:
        for node in ast.walk(stmt):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
                called.add(node.func.id)
            elif isinstance(node, (ast.Global, ast.Nonlocal)):
                globals_.update(node.names)
    facts = UnitFacts(Names.of_statements(statements), frozenset(globals_), frozenset(called),
                      tuple(find_comments(text)))
    _FACTS[text] = facts
    while len(_FACTS) > _FACTS_KEPT:
        _FACTS.popitem(last=False)
    return facts


# ---- reading a text that does not parse ------------------------------------------------------------------
def _parseable_part(text: str) -> str:
    """The text with every top-level definition and module-level statement that does not parse on its own
    replaced by empty lines."""
    lines = _NEWLINE.split(text)
    groups: list[list[int]] = []  # 1-based line numbers of each top-level definition or statement
    i, n = 0, len(lines)
    while i < n:
        if _TOP_LEVEL_DEF.match(lines[i]):
            start = i
            i += 1
            while i < n and (lines[i - 1].lstrip().startswith("@") or not _starts_statement(lines[i])):
                i += 1
            groups.append(list(range(start + 1, i + 1)))
            continue
        if not groups or _starts_statement(lines[i]):
            groups.append([i + 1])
        else:
            groups[-1].append(i + 1)
        i += 1
    keep: set[int] = set()
    for g in groups:
        if parse("\n".join(lines[k - 1] for k in g))[0] is not None:
            keep.update(g)
    return "\n".join(line if k in keep else "" for k, line in enumerate(lines, start=1))


def _starts_statement(line: str) -> bool:
    """A column-0 line that begins a new top-level statement (not a blank, comment or closing bracket)."""
    return bool(line) and not line[0].isspace() and line[0] not in "#)]}"

