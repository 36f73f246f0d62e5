"""Incremental analysis of one document, for editors: top-level definitions are analysed one by one.

A module is split into its top-level `def`/`class` blocks ("chunks") and the rest ("context": imports,
constants, module-level code). A chunk is analysed as the text `context + chunk`, so it sees the module's
imports, aliases and constants; the result is cached by that text and moved to where the chunk sits in
the document. The context's own module-level expressions are analysed once, in place.

So an edit inside one function re-analyses that function only (and, below it, the engine's
`AnalysisCache` re-analyses only the expressions whose structure or ranges changed), and a file with a
syntax error still gets findings for every part that parses. Nothing here knows about editors.
"""
from __future__ import annotations

import ast
import re
import threading
import time
import warnings
from collections import OrderedDict
from dataclasses import dataclass, replace
from typing import Callable

from condhint.config import Config
from condhint.engine import DEFAULT_CACHE, AnalysisCache, ModuleAnalysis, analyse_module, parse
from condhint.expr import INPUT, Node, Span, topological
from condhint.findings import Finding
from condhint.site import Site

_TOP_LEVEL_DEF = re.compile(r"^(?:@|def\s|async\s+def\s|class\s)")
_GLOBAL = re.compile(r"^\s+global\s+([\w\s,]+?)\s*(?:#.*)?$")
_NEWLINE = re.compile(r"\r\n|\r|\n")


class Abandoned(Exception):
    """A newer version of the document arrived: this analysis is no longer wanted."""


@dataclass(frozen=True)
class Block:
    """Lines `start..end` (1-based, inclusive) of the document."""

    start: int
    end: int


@dataclass
class Piece:
    """An analysed part of the document: one top-level definition, or the module-level code.

    The part was analysed as a text of its own whose first `head` lines are context; line `k > head` of
    that text is document line `k + shift`.
    """

    block: Block | None  # None: the module-level code (analysed in place)
    head: int
    shift: int
    analysis: ModuleAnalysis
    findings: list[Finding]  # in document positions
    raw: list[Finding]  # the same findings in the positions of the analysed text
    key: str  # cache key of the analysed text
    reused: bool = False

    def owns(self, line: int) -> bool:
        if self.block is None:
            return True
        return self.block.start <= line <= self.block.end

    def to_document(self, span: Span) -> Span:
        return Span(span.line + self.shift, span.col, span.end_line + self.shift, span.end_col)

    def to_piece_line(self, line: int) -> int:
        return line - self.shift


@dataclass
class DocumentAnalysis:
    findings: list[Finding]  # document positions, sorted; suppressed ones are not included
    pieces: list[Piece]
    status: str  # "ok" or "syntax-error"
    analysed: int = 0  # pieces analysed in this run
    reused: int = 0  # pieces taken from the cache
    seconds: float = 0.0
    site_misses: int = 0  # expressions analysed (not found in the AnalysisCache) in this run

    def piece_at(self, line: int) -> Piece | None:
        """The piece that owns a document line: a definition's block first, else the module-level code."""
        module = None
        for p in self.pieces:
            if p.block is None:
                module = p
            elif p.owns(line):
                return p
        return module

    def node_at(self, line: int, col: int) -> tuple[Piece, Site, Node] | None:
        """The innermost operation with inputs, of any analysed expression, whose source range contains the
        position (document line, 1-based; column in code points)."""
        piece = self.piece_at(line)
        if piece is None:
            return None
        at = Span(piece.to_piece_line(line), col, piece.to_piece_line(line), col)
        best: tuple[Piece, Site, Node] | None = None
        best_size = None
        for site in piece.analysis.sites:
            for node in topological(site.root):
                if node.span is None or node.is_leaf or not _contains(node.span, at) or not _has_inputs(node):
                    continue
                size = (node.span.end_line - node.span.line, node.span.end_col - node.span.col
                        if node.span.line == node.span.end_line else 10**6)
                if best_size is None or size < best_size:
                    best, best_size = (piece, site, node), size
        return best


def _has_inputs(node: Node) -> bool:
    """Constant subexpressions (`RHO_SEA * G`) have no condition to show: the enclosing one is meant."""
    return any(n.kind == INPUT for n in topological(node))


def _contains(span: Span, at: Span) -> bool:
    return (span.line, span.col) <= (at.line, at.col) <= (span.end_line, span.end_col)


class PieceCache:
    """Analysed pieces by their text and settings (thread-safe, bounded)."""

    def __init__(self, capacity: int = 4000) -> None:
        self.capacity = capacity
        self._data: OrderedDict[str, tuple[ModuleAnalysis, list[Finding]]] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key: str) -> tuple[ModuleAnalysis, list[Finding]] | None:
        with self._lock:
            hit = self._data.get(key)
            if hit is not None:
                self._data.move_to_end(key)
            return hit

    def put(self, key: str, value: tuple[ModuleAnalysis, list[Finding]]) -> None:
        with self._lock:
            self._data[key] = value
            self._data.move_to_end(key)
            while len(self._data) > self.capacity:
                self._data.popitem(last=False)


DEFAULT_PIECES = PieceCache(capacity=1024)  # a piece holds its syntax tree and sites: keep this modest


def split_lines(text: str) -> list[str]:
    return _NEWLINE.split(text)


def blocks_of(text: str, lines: list[str]) -> tuple[list[Block], Finding | None]:
    """Top-level definitions of a module, and the syntax error of the whole text (None if it parses).

    From the syntax tree when the text parses; otherwise from the lines: a definition starts at a
    column-0 `def`/`class`/decorator line and runs to the next column-0 statement.
    """
    tree, err = parse(text)
    if tree is not None:
        out = []
        for stmt in tree.body:
            if isinstance(stmt, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                start = min([stmt.lineno, *(d.lineno for d in stmt.decorator_list)])
                out.append(Block(start, stmt.end_lineno or stmt.lineno))
        return out, None
    out = []
    i, n = 0, len(lines)
    while i < n:
        if _TOP_LEVEL_DEF.match(lines[i]):
            start = i
            i += 1
            while i < n and (lines[i - 1].lstrip().startswith("@") or not _starts_statement(lines[i])):
                i += 1
            out.append(Block(start + 1, i))
        else:
            i += 1
    return out, err


def _starts_statement(line: str) -> bool:
    """A column-0 line that begins a new top-level statement (not a blank, comment or closing bracket)."""
    return bool(line) and not line[0].isspace() and line[0] not in "#)]}"


def _parses(text: str) -> bool:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ast.parse(text)
        return True
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return False


def _context_lines(lines: list[str], blocks: list[Block], whole_parses: bool) -> list[int]:
    """Line numbers of the module-level code that parses (all of it when the document parses)."""
    inside = set()
    for b in blocks:
        inside.update(range(b.start, b.end + 1))
    ctx = [k for k in range(1, len(lines) + 1) if k not in inside]
    if whole_parses or _parses("\n".join(lines[k - 1] for k in ctx)):
        return ctx
    # Keep the module-level statements that parse on their own (a half-typed one is left out).
    groups: list[list[int]] = []
    for k in ctx:
        if not groups or _starts_statement(lines[k - 1]):
            groups.append([k])
        else:
            groups[-1].append(k)
    return [k for g in groups if _parses("\n".join(lines[j - 1] for j in g)) for k in g]


def _globals_stub(lines: list[str], blocks: list[Block]) -> list[str]:
    """Names declared `global` inside definitions make module names non-constant: tell every piece."""
    names: list[str] = []
    for b in blocks:
        for k in range(b.start, b.end + 1):
            m = _GLOBAL.match(lines[k - 1])
            if m:
                names += [x.strip() for x in m.group(1).split(",") if x.strip().isidentifier()]
    if not names:
        return []
    return ["def _condhint_module_globals_():", f"    global {', '.join(sorted(set(names)))}"]


def _settings_key(cfg: Config) -> str:
    return repr(cfg)


def analyse_document(text: str, path: str, cfg: Config, cache: AnalysisCache | None = DEFAULT_CACHE,
                     pieces: PieceCache = DEFAULT_PIECES,
                     abandoned: Callable[[], bool] | None = None,
                     progress: Callable[[int, int], None] | None = None) -> DocumentAnalysis:
    """Findings of a document, analysed piece by piece with reuse of unchanged pieces.

    `abandoned()` is polled between pieces (raising `Abandoned` when true); `progress(done, total)` is
    called as pieces complete.
    """
    t0 = time.perf_counter()
    misses0 = cache.misses if cache is not None else 0
    lines = split_lines(text)
    blocks, error = blocks_of(text, lines)
    whole_parses = error is None
    ctx = _context_lines(lines, blocks, whole_parses)
    ctx_set = set(ctx)
    head_lines = [lines[k - 1] for k in ctx] + _globals_stub(lines, blocks)
    head = len(head_lines)
    settings = _settings_key(cfg)
    out = DocumentAnalysis([], [], "ok" if whole_parses else "syntax-error")

    jobs: list[tuple[Block | None, str, int, int]] = []  # (block, analysed text, head, shift)
    module_text = "\n".join(lines[k - 1] if k in ctx_set else "" for k in range(1, len(lines) + 1))
    jobs.append((None, module_text, 0, 0))
    for b in blocks:
        body = lines[b.start - 1:b.end]
        jobs.append((b, "\n".join(head_lines + body), head, b.start - 1 - head))

    total = len(jobs)
    for i, (block, piece_text, h, shift) in enumerate(jobs):
        if abandoned is not None and abandoned():
            raise Abandoned
        key = f"{settings}\0{path}\0{piece_text}"
        hit = pieces.get(key)
        reused = hit is not None
        if hit is None:
            ma = analyse_module(piece_text, path, cfg, cache)
            raw = list(ma.report.findings)
            pieces.put(key, (ma, raw))
        else:
            ma, raw = hit
        piece = Piece(block, h, shift, ma, [], [], key, reused)
        for f in raw if ma.report.status != "syntax-error" else ():  # reported once, below
            if block is not None and f.span.line <= h:
                continue  # module-level code seen as context: reported by the module piece
            piece.raw.append(f)
            piece.findings.append(_placed(f, piece))
        out.pieces.append(piece)
        out.reused += reused
        out.analysed += not reused
        if progress is not None:
            progress(i + 1, total)
    found = [f for p in out.pieces for f in p.findings]
    if error is not None and cfg.min_severity == "info":
        error.path = path
        error.message = (f"{error.message.split(';')[0]}; the definition or statement it is in is not analysed "
                         "until it parses (the rest of the file is)")
        found.append(error)
    out.findings = sorted(found,
                          key=lambda f: (f.span.line, f.span.col, f.code))
    out.seconds = time.perf_counter() - t0
    out.site_misses = (cache.misses - misses0) if cache is not None else 0
    return out


def _placed(f: Finding, piece: Piece) -> Finding:
    """A finding moved from the piece's own text to the document."""
    if piece.shift == 0:
        g = replace(f)
    else:
        s = piece.shift
        g = replace(f, span=piece.to_document(f.span), related=[(ln + s, note) for ln, note in f.related],
                    fixes=[replace(x, span=piece.to_document(x.span)) for x in f.fixes])
    site = getattr(f, "_site", None)
    if site is not None:
        g._site = site  # type: ignore[attr-defined]
    g._piece = piece  # type: ignore[attr-defined]
    g._raw = f  # type: ignore[attr-defined]
    return g
