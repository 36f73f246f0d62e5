"""A content-addressed on-disk cache of file analyses, so `check` of an unchanged tree is nearly free.

Key: sha256 over the file's bytes, condhint's version (and a digest of its own source, so a development
checkout never reads entries written by other code), the resolved settings for the file, whether fixes
were searched and, when fixes or κ formulas are computed only for the findings a run writes, what decides
those (`review.written`). Value: the file report as JSON (findings with their fixes, suppressed findings, status).
The path is not part of the key: equal files share an entry and get the path they are checked under.

With fixes or κ formulas (JSON, SARIF), each formula is also kept by its expression (`get_formula`): a
changed file's unchanged expressions do not derive theirs again. Only formulas are kept this way: a fix
depends on the whole file (it is checked by re-analysing the patched text), so it is kept with the file's
report only.

Safe to share between processes and CI runs: an entry is written to a temporary file in the same directory
and renamed into place, so a reader sees a whole entry or none; an unreadable entry is a miss and is removed.
The cache keeps under a size cap by evicting the entries used longest ago (a hit refreshes an entry's time).
"""
from __future__ import annotations

import hashlib
import json
import os
import tempfile
from dataclasses import asdict, fields
from pathlib import Path
from typing import Any, Callable

from condhint import __version__
from condhint.config import Config
from condhint.expr import Span
from condhint.findings import FileReport, Finding, Fix, InputInfo
from condhint.reading.imported import dependency_stamp

DEFAULT_MAX_BYTES = 256 * 1024 * 1024
FORMAT = 1  # bump when the stored layout changes
_FINDING_FIELDS = {f.name for f in fields(Finding)}
_REPORT_FIELDS = {f.name for f in fields(FileReport)}
_code_digest: str | None = None


def code_digest() -> str:
    """condhint's version and a digest of its own .py files (computed once per process)."""
    global _code_digest
    if _code_digest is None:
        h = hashlib.sha256(f"{__version__}\0{FORMAT}".encode())
        root = Path(__file__).resolve().parent
        for p in sorted(root.rglob("*.py")):
            h.update(p.relative_to(root).as_posix().encode() + b"\0" + p.read_bytes())
        _code_digest = h.hexdigest()
    return _code_digest


def default_dir() -> Path:
    """$CONDHINT_CACHE_DIR, else $XDG_CACHE_HOME/condhint, else ~/.cache/condhint."""
    env = os.environ.get("CONDHINT_CACHE_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "condhint"


# ---- (de)serialising the findings model ------------------------------------------------------------------
def _finding_to_json(f: Finding) -> dict[str, Any]:
    return asdict(f)  # plain data: `origin` names the site, which stays in the analysis


def _finding_from_json(d: dict[str, Any], path: str) -> Finding:
    d = {k: v for k, v in d.items() if k in _FINDING_FIELDS}
    d["path"] = path
    d["span"] = Span(**d["span"])
    d["inputs"] = {k: InputInfo(**v) for k, v in d.get("inputs", {}).items()}
    d["fixes"] = [Fix(**{**fx, "span": Span(**fx["span"])}) for fx in d.get("fixes", [])]
    d["related"] = [tuple(r) for r in d.get("related", [])]
    return Finding(**d)


def report_to_json(report: FileReport) -> dict[str, Any]:
    out: dict[str, Any] = {k: getattr(report, k) for k in _REPORT_FIELDS - {"findings", "suppressed", "path"}}
    out["findings"] = [_finding_to_json(f) for f in report.findings]
    out["suppressed"] = [_finding_to_json(f) for f in report.suppressed]
    return out


def report_from_json(d: dict[str, Any], path: str) -> FileReport:
    rep = FileReport(path=path, status=d["status"])
    for k, v in d.items():
        if k in _REPORT_FIELDS and k not in ("findings", "suppressed", "path"):
            setattr(rep, k, v)
    rep.findings = [_finding_from_json(f, path) for f in d["findings"]]
    rep.suppressed = [_finding_from_json(f, path) for f in d["suppressed"]]
    return rep


# ---- the cache -------------------------------------------------------------------------------------------
class DiskCache:
    """File reports by content hash under `root` (a directory shared freely between processes)."""

    def __init__(self, root: Path | str | None = None, max_bytes: int = DEFAULT_MAX_BYTES) -> None:
        self.root = Path(root) if root is not None else default_dir()
        self.max_bytes = max_bytes
        self.hits = self.misses = 0
        self.formula_hits = 0
        self._written = 0  # bytes written since the last size check

    def key(self, raw: bytes, cfg: Config, fixes: bool = False, variant: str = "") -> str:
        h = hashlib.sha256()
        for part in (code_digest(), repr(cfg), str(bool(fixes)), variant):
            h.update(part.encode() + b"\0")
        h.update(raw)
        return h.hexdigest()

    def _entry(self, key: str) -> Path:
        return self.root / key[:2] / f"{key}.json"

    def get(self, key: str, path: str) -> FileReport | None:
        entry = self._entry(key)
        try:
            data = json.loads(entry.read_bytes())
            report = report_from_json(data, path)
        except FileNotFoundError:
            self.misses += 1
            return None
        except (OSError, ValueError, KeyError, TypeError):  # torn or foreign entry: a miss, and it goes
            self.misses += 1
            _unlink(entry)
            return None
        try:
            os.utime(entry)  # used now: evicted last
        except OSError:
            pass
        self.hits += 1
        return report

    def put(self, key: str, report: FileReport) -> None:
        self._write(self._entry(key), json.dumps(report_to_json(report), ensure_ascii=False).encode("utf-8"))

    # κ formulas by expression, for the files that changed: the costliest part of their JSON or SARIF report
    def _formula_entry(self, key: str) -> Path:
        return self._entry(hashlib.sha256(f"formula\0{code_digest()}\0{key}".encode()).hexdigest())

    def get_formula(self, key: str) -> str | None:
        """The κ formula stored under `engine.formula_key`'s `key`, or None."""
        entry = self._formula_entry(key)
        try:
            text = json.loads(entry.read_bytes())["formula"]
        except FileNotFoundError:
            return None
        except (OSError, ValueError, KeyError, TypeError):
            _unlink(entry)
            return None
        if not isinstance(text, str) or not text:
            return None
        self.formula_hits += 1
        return text

    def put_formula(self, key: str, text: str) -> None:
        self._write(self._formula_entry(key), json.dumps({"formula": text}, ensure_ascii=False).encode("utf-8"))

    def _write(self, entry: Path, data: bytes) -> None:
        try:
            entry.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=entry.parent)
            try:
                with os.fdopen(fd, "wb") as fh:
                    fh.write(data)
                os.replace(tmp, entry)
            except BaseException:
                _unlink(Path(tmp))
                raise
        except OSError:
            return  # a cache that cannot be written is no cache: the run goes on
        self._written += len(data)
        if self._written > self.max_bytes // 16:
            self._written = 0
            self.prune()

    def entries(self) -> list[tuple[float, int, Path]]:
        """(last use, size, path) of every entry."""
        out = []
        for p in self.root.glob("??/*.json"):
            try:
                st = p.stat()
            except FileNotFoundError:
                continue
            out.append((st.st_mtime, st.st_size, p))
        return out

    def size(self) -> int:
        return sum(s for _, s, _ in self.entries())

    def prune(self, max_bytes: int | None = None) -> int:
        """Evict the entries used longest ago until the cache holds at most 90% of the cap; returns removed."""
        cap = self.max_bytes if max_bytes is None else max_bytes
        items = sorted(self.entries())
        total = sum(s for _, s, _ in items)
        removed = 0
        for _, size, p in items:
            if total <= cap * 0.9:
                break
            _unlink(p)
            total -= size
            removed += 1
        return removed

    def clear(self) -> None:
        for _, _, p in self.entries():
            _unlink(p)

    def check_target(self, target: Any, cfg: Config, fixes: bool,
                     check: Callable[[Any, Config, bool], FileReport], variant: str = "") -> FileReport:
        """`check(target, cfg, fixes)`'s report, from the cache when the file's bytes were seen before
        (`variant`: anything else the report depends on)."""
        try:
            raw = target.path.read_bytes()
        except OSError:
            return check(target, cfg, fixes)  # reported as unreadable by `check`
        # inlined calls into the package's other files make the report depend on them (issue 15)
        stamp = dependency_stamp(raw.decode("utf-8", "replace"), str(target.path))
        key = self.key(raw + stamp.encode(), cfg.for_path(target.shown), fixes, variant)
        hit = self.get(key, target.shown)
        if hit is not None:
            return hit
        report = check(target, cfg, fixes)
        if report.status != "error":  # an unreadable file is cheap to re-read and may be fixed by then
            self.put(key, report)
        return report


def _unlink(p: Path) -> None:
    try:
        p.unlink()
    except OSError:
        pass
