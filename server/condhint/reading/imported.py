"""Functions of other modules of the same package, reached through `from … import name` (read from disk, never
imported or run), and the stamp of those files that every cache of a file's analysis must include.

A module is found next to the file: `from .physics import gamma` (relative), or `from pkg.physics import gamma`
when `pkg` is a package directory (with `__init__.py`) containing the file. Nothing on `sys.path` is searched:
only the project's own files are read.
"""
from __future__ import annotations

import ast
import hashlib
import re
from collections import OrderedDict
from pathlib import Path
from typing import TYPE_CHECKING, Callable

from condhint.sourcefile import UnreadableFile, read_source

if TYPE_CHECKING:
    from condhint.reading.module_index import ModuleIndex

_FROM = re.compile(r"^[ \t]*from[ \t]+(\.*)([\w.]*)[ \t]+import\b", re.M)
_LOADED: OrderedDict[tuple[str, int, int], "ModuleIndex | None"] = OrderedDict()
_KEEP = 64  # module indexes of imported files kept in memory


def resolve(module: str, level: int, here: str) -> Path | None:
    """The .py file of `module` (imported with `level` leading dots) from the file `here`, inside its package."""
    if not here:
        return None
    base = Path(here).resolve().parent
    parts = [p for p in module.split(".") if p]
    if level:
        for _ in range(level - 1):
            base = base.parent
        candidates = [base]
    else:
        candidates = []
        d = base
        while (d / "__init__.py").is_file():  # the package directories holding the file, innermost first
            candidates.append(d.parent)
            d = d.parent
        candidates = [c for c in candidates if parts and (c / parts[0] / "__init__.py").is_file()]
    for root in candidates:
        target = root.joinpath(*parts)
        for f in (target.with_suffix(".py") if parts else None, target / "__init__.py"):
            if f is not None and f.is_file():
                return f
    return None


def imported_functions(index: "ModuleIndex") -> dict[str, tuple[Path, str]]:
    """Local name -> (file, name there) for module-level `from … import` of the package's own modules."""
    if index.imports is None:
        found: dict[str, tuple[Path, str]] = {}
        for st in index.tree.body:
            if isinstance(st, ast.ImportFrom) and (st.level or st.module):
                f = resolve(st.module or "", st.level or 0, index.path)
                if f is not None and str(f) != str(Path(index.path).resolve()):
                    for alias in st.names:
                        found[alias.asname or alias.name] = (f, alias.name)
        index.imports = found
    return index.imports


def load(path: Path, read: Callable[[str], "ModuleIndex | None"]) -> "ModuleIndex | None":
    """The module index `read` makes of a project file (cached by path, modification time and size), or None."""
    try:
        st = path.stat()
    except OSError:
        return None
    key = (str(path), st.st_mtime_ns, st.st_size)
    if key in _LOADED:
        _LOADED.move_to_end(key)
        return _LOADED[key]
    try:
        index = read(read_source(path).text)
    except (UnreadableFile, RecursionError, MemoryError):
        index = None
    if index is not None:
        index.path = str(path)
    _LOADED[key] = index
    while len(_LOADED) > _KEEP:
        _LOADED.popitem(last=False)
    return index


def dependency_stamp(text: str, path: str) -> str:
    """A digest of the package files `text` may import functions from ("" when none): part of the key of every
    cache of the file's analysis, since inlined callees make it depend on them (a superset, read by pattern)."""
    if "import" not in text or not path:
        return ""
    files = sorted({str(f) for dots, module in _FROM.findall(text)
                    if (f := resolve(module, len(dots), path)) is not None})
    if not files:
        return ""
    h = hashlib.sha256()
    for f in files:
        h.update(f.encode("utf-8", "surrogatepass") + b"\0")
        try:
            h.update(Path(f).read_bytes())
        except OSError:
            h.update(b"<unreadable>")
        h.update(b"\0")
    return h.hexdigest()
