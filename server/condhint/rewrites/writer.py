"""Writing one candidate as a replacement for one target: the text, its imports and the span it replaces.

The names usable there are those bound on earlier lines that still hold the same value (and module
constants); the parentheses are those the target's place in the syntax tree needs.
"""
from __future__ import annotations

import ast
import keyword
from typing import TYPE_CHECKING, Any, Callable, TypeVar

from condhint.expr import INPUT, Node, Span, topological
from condhint.rewrites import codegen
from condhint.site import Site

if TYPE_CHECKING:
    from condhint.reading.module_index import ModuleIndex


class Writer:
    """Code for candidates replacing one target, in the file's style and with the names visible there."""

    def __init__(self, index: "ModuleIndex", constants: dict[str, Node], site: Site, target: Node) -> None:
        assert target.span is not None
        self.source = index.source
        self.tree = index.tree
        self.target = target
        self.style = _style(index.tree)
        self.site_nodes = topological(site.root)
        self.names = visible_names(index, constants, site, target)
        self.rebound = rebound_names(index, site, target)

    def reuse(self, node: Node) -> str | None:
        if node.kind == INPUT or node.span is None or not node.text or node is self.target:
            return None
        if not self.target.span.contains(node.span) or self.source.segment(node.span) != node.text:  # type: ignore[union-attr]
            return None
        return node.text if codegen.is_expression(node.text) else None

    @property
    def evaluates_both_branches(self) -> bool:
        """A choice is written here as numpy's `where`, which computes both branches (else `a if c else b`)."""
        return codegen.Spelling.for_site(self.style, self.site_nodes).array_style

    def write(self, replacement: Node) -> tuple[str, list[str], Span]:
        """The replacement text, the imports it needs, and the span it replaces (the target's, widened over
        grouping parentheses that a call or a name no longer needs)."""
        spelling = codegen.Spelling.for_site(self.style, self.site_nodes)
        text, prec = codegen.Emitter(spelling, self.reuse, self.names, self.rebound).text(replacement)
        span = self.target.span
        assert span is not None
        grouping = self._grouping(span)
        if grouping is not None and prec == codegen.ATOM_P:
            span = grouping
        elif grouping is None and prec < self._required():
            text = f"({text})"
        codegen.check_side_effects(self.target.text, text, replacement)
        ast.parse(text, mode="eval")
        return text, spelling.imports, span

    def _grouping(self, span: Span) -> Span | None:
        """The span including the parentheses around the target when they only group it."""
        if span.line != span.end_line:
            return None
        line = self.source.lines[span.line - 1]
        left, right = line[: span.col].rstrip(), line[span.end_col:]
        if not left.endswith("(") or not right.lstrip().startswith(")"):
            return None
        before = left[:-1].rstrip()
        word = before[len(before.rstrip("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789_")):]
        if (word and not keyword.iskeyword(word)) or before.endswith((")", "]", "}", "'", '"')):
            return None  # the parentheses of a call, or after a subscript or a string
        close = span.end_col + (len(right) - len(right.lstrip())) + 1
        return Span(span.line, len(left) - 1, span.end_line, close)

    def _required(self) -> int:
        """The precedence the target's place in the code needs (its own, when the place is not found)."""
        found = codegen.place(self.tree, self.source, self.target.span)  # type: ignore[arg-type]
        return found if found is not None else codegen.precedence(self.target.text)


def visible_names(index: "ModuleIndex", constants: dict[str, Node], site: Site, target: Node) -> dict[int, str]:
    """Nodes bound to a name on an earlier line that still holds it where `target` is, and module constants
    (`constants`: the ones the site's nodes share)."""
    assert target.span is not None
    line = target.span.line
    stores = _stores(index.tree)
    out: dict[int, str] = {}
    for key, b in site.bindings_by_node.items():
        if b.line < line and not any(b.line < ln < line for ln in stores.get(b.name, ())) and not (
                b.span.line <= line <= b.span.end_line):
            out[key] = b.name
    for name, node in constants.items():
        if node.span is not None and node.span.line != line:
            out.setdefault(id(node), name)
    out.pop(id(target), None)
    return out


def rebound_names(index: "ModuleIndex", site: Site, target: Node) -> set[str]:
    """Texts of the site's inputs (and `name[` for their items) given a new value between the line after which
    the input holds it (`Site.held_after`: where it was bound or first read, else the start of the definition
    holding `target`) and `target`'s line: there the text no longer spells the input's value (`factor += 1`
    before `factor ** n - 1`), so a fix must not write it. `nm = norm[mask]` itself does not rebind `nm`."""
    assert target.span is not None
    line = target.span.line
    start = max((d.lineno for d in _functions(index.tree) if d.lineno <= line <= (d.end_lineno or d.lineno)),
                default=index.unit_at(line).start)  # the innermost function holding the target, its own names
    stores = _stores(index.tree)
    out: set[str] = set()
    for n in topological(site.root):
        if n.kind != INPUT or not n.text:
            continue
        since = max(site.held_after.get(id(n), 0), start - 1)
        for key in (n.text, n.text.split("[")[0] + "["):
            if any(since < ln < line for ln in stores.get(key, ())):
                out.add(key)
    return out



T = TypeVar("T")
_PER_TREE: dict[tuple[str, int], tuple[ast.Module, Any]] = {}


def _per_tree(what: str, tree: ast.Module, compute: Callable[[ast.Module], T]) -> T:
    """`compute(tree)`, cached per syntax tree (every finding of a file shares it)."""
    hit = _PER_TREE.get((what, id(tree)))
    if hit is not None and hit[0] is tree:
        return hit[1]
    if len(_PER_TREE) > 24:
        _PER_TREE.clear()
    out = compute(tree)
    _PER_TREE[(what, id(tree))] = (tree, out)
    return out


def _style(tree: ast.Module) -> codegen.Style:
    """The module's import style."""
    return _per_tree("style", tree, codegen.Style.of)


def _functions(tree: ast.Module) -> list[ast.FunctionDef | ast.AsyncFunctionDef]:
    return _per_tree("functions", tree, lambda t: [n for n in ast.walk(t)
                                                   if isinstance(n, (ast.FunctionDef, ast.AsyncFunctionDef))])


def _stores(tree: ast.Module) -> dict[str, list[int]]:
    """Lines where each name is assigned."""
    return _per_tree("stores", tree, _find_stores)


def _find_stores(tree: ast.Module) -> dict[str, list[int]]:
    out: dict[str, list[int]] = {}
    for n in ast.walk(tree):
        if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Store):
            out.setdefault(n.id, []).append(n.lineno)
        elif isinstance(n, ast.Attribute) and isinstance(n.ctx, ast.Store) and isinstance(n.value, ast.Name):
            out.setdefault(f"{n.value.id}.{n.attr}", []).append(n.lineno)
        elif isinstance(n, ast.Subscript) and isinstance(n.ctx, ast.Store) and isinstance(n.value, ast.Name):
            out.setdefault(f"{n.value.id}[", []).append(n.lineno)  # any item of it
    return out
