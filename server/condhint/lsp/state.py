"""Per-document state of the language server: the text, its version, and the latest analysis of it."""
from __future__ import annotations

import asyncio
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from condhint.engine import ModuleAnalysis
from condhint.reading.source import split_lines


@dataclass
class DocumentState:
    uri: str
    path: str  # file system path (or the URI when it is not a file)
    version: int | None
    text: str
    lines: list[str] = field(default_factory=list)
    result: ModuleAnalysis | None = None  # analysis of generation `result_version`
    result_version: int = -1
    result_doc_version: int | None = None  # the client's version number of that text
    result_lines: list[str] = field(default_factory=list)  # the lines `result` was computed on
    diagnostics: list[Any] | None = None  # the result as LSP diagnostics (converted once)
    pending: asyncio.Task | None = None  # debounce + analysis of the current version
    ready: asyncio.Future | None = None  # resolved with the analysis of the current version
    progress: tuple[int, int] = (0, 0)  # units done / total of the running analysis
    closed: bool = False
    generation: int = 0  # bumped on every change (also without a version) and on settings changes
    plans: dict[str, Any] = field(default_factory=dict)  # code actions offered for this generation, by id

    def __post_init__(self) -> None:
        self.lines = split_lines(self.text)

    def update(self, text: str, version: int | None) -> None:
        self.text = text
        self.lines = split_lines(text)
        self.version = version
        self.invalidate()

    def invalidate(self) -> None:
        """The text or the settings changed: results so far are stale."""
        self.generation += 1
        self.plans = {}
        if self.ready is not None and not self.ready.done():
            self.ready.cancel()  # waiters re-wait on the new generation's future
        self.ready = None

    @property
    def current(self) -> bool:
        """Whether `result` belongs to the text as it is now."""
        return self.result is not None and self.result_version == self.generation


class Documents:
    """Open documents by URI."""

    def __init__(self) -> None:
        self._docs: dict[str, DocumentState] = {}

    def open(self, uri: str, path: str, version: int | None, text: str) -> DocumentState:
        return self.add(DocumentState(uri, path, version, text))

    def add(self, state: DocumentState) -> DocumentState:
        """Track `state` (a document, or a notebook's joined cells) under its URI, replacing an older one."""
        old = self._docs.get(state.uri)
        if old is not None:
            old.closed = True
        self._docs[state.uri] = state
        return state

    def get(self, uri: str) -> DocumentState | None:
        return self._docs.get(uri)

    def close(self, uri: str) -> DocumentState | None:
        state = self._docs.pop(uri, None)
        if state is not None:
            state.closed = True
            state.generation += 1
            if state.pending is not None:
                state.pending.cancel()
            if state.ready is not None and not state.ready.done():
                state.ready.cancel()
        return state

    def __iter__(self):
        return iter(list(self._docs.values()))


def path_of(uri: str, fs_path: str | None) -> str:
    return fs_path if fs_path else uri


def relative_to(path: str, root: Path | None) -> str:
    """The path as `per_path` globs see it: relative to the workspace root when inside it."""
    if root is None:
        return path
    try:
        return str(Path(path).resolve().relative_to(root.resolve()))
    except (ValueError, OSError):
        return path
