"""`--diff-base REV`: the lines added or changed since a git revision, read from `git diff --unified=0`.

The working tree is compared with REV, so uncommitted edits count as changed. Files git does not track yet
(and does not ignore) are new in full. For notebooks the JSON lines mean little, so the code cells of the
revision's notebook (`git show REV:path`) are compared with today's, line by line, with difflib.
"""
from __future__ import annotations

import codecs
import difflib
import os
import re
import subprocess
from dataclasses import dataclass, field
from pathlib import Path

from condhint.findings import Finding

_HUNK = re.compile(r"^@@ -\d+(?:,\d+)? \+(\d+)(?:,(\d+))? @@")


class GitError(Exception):
    """Not a repository, an unknown revision, or git itself failing: a usage error (exit 2)."""


def _git(args: list[str], cwd: Path) -> str:
    try:
        proc = subprocess.run(["git", "-c", "core.quotepath=off", *args], cwd=cwd, capture_output=True,
                              timeout=120)
    except FileNotFoundError:
        raise GitError("--diff-base needs git, which is not installed") from None
    except subprocess.TimeoutExpired:
        raise GitError(f"git {args[0]} took longer than 120 s") from None
    if proc.returncode != 0:
        msg = proc.stderr.decode("utf-8", "replace").strip().splitlines()
        raise GitError(msg[-1] if msg else f"git {args[0]} failed")
    return proc.stdout.decode("utf-8", "surrogateescape")


def _unquote(path: str) -> str:
    """git C-quotes unusual paths ("a\\tb"); decode them to the name on disk."""
    if len(path) >= 2 and path[0] == '"' and path[-1] == '"':
        raw = codecs.escape_decode(path[1:-1].encode("utf-8", "surrogateescape"))[0]
        return raw.decode("utf-8", "surrogateescape")
    return path


def parse_diff(text: str) -> dict[str, set[int]]:
    """New-side line numbers added or changed per file (paths as in `+++ b/…`); pure deletions add none."""
    out: dict[str, set[int]] = {}
    current: set[int] | None = None
    for line in text.splitlines():
        if line.startswith("+++ "):
            name = _unquote(line[4:].rstrip("\t"))
            if name == "/dev/null":
                current = None
            else:
                name = name[2:] if name.startswith(("b/", "w/", "i/")) else name
                current = out.setdefault(name, set())
        elif line.startswith("@@") and current is not None:
            m = _HUNK.match(line)
            if m:
                start, count = int(m.group(1)), int(m.group(2) if m.group(2) is not None else 1)
                current.update(range(start, start + count))
    return out


def _cell_lines(text: str | None) -> list[tuple[int, int, str]]:
    """(cell, line, text) for every line of every code cell of a notebook's JSON text."""
    if text is None:
        return []
    import json

    from condhint.review.notebooks import cells_of

    try:
        cells = cells_of(json.loads(text))
    except ValueError:
        return []
    return [(c.number, i, s) for c in cells for i, s in enumerate(c.text.split("\n"), 1)]


def notebook_changes(old: str | None, new: str | None) -> set[tuple[int, int]]:
    """(cell, line) pairs of today's notebook whose line is not in the revision's code cells."""
    a, b = _cell_lines(old), _cell_lines(new)
    sm = difflib.SequenceMatcher(None, [t for _, _, t in a], [t for _, _, t in b], autojunk=False)
    changed: set[tuple[int, int]] = set()
    for tag, _, _, j1, j2 in sm.get_opcodes():
        if tag in ("replace", "insert"):
            changed.update((b[j][0], b[j][1]) for j in range(j1, j2))
    return changed


@dataclass
class ChangedLines:
    """What changed since REV: lines per file (cell 0) or per notebook cell, and files new in full."""

    lines: dict[Path, set[tuple[int, int]]] = field(default_factory=dict)
    new_files: set[Path] = field(default_factory=set)

    def touches(self, f: Finding) -> bool:
        """True when the finding's range (or a line its formula is computed on) was added or changed."""
        path = Path(os.path.abspath(f.path))
        if path in self.new_files:
            return True
        changed = self.lines.get(path)
        if not changed:
            return False
        cell = getattr(f, "cell", None) or 0
        wanted = set(range(f.span.line, f.span.end_line + 1)) | {ln for ln, _ in f.related}
        return any((cell, ln) in changed for ln in wanted)


def _repository(cwd: Path, paths: list[str]) -> tuple[Path, Path]:
    """(directory to run git in, top of the work tree): the working directory's repository, else the paths'."""
    first = Path(paths[0]) if paths else cwd
    places = [cwd, (cwd / first) if (cwd / first).is_dir() else (cwd / first).parent]
    for place in places:
        try:
            return place, Path(_git(["rev-parse", "--show-toplevel"], place).strip())
        except GitError:
            continue
    raise GitError(f"{places[-1] if paths else cwd} is not inside a git repository")


def changed_since(rev: str, paths: list[str], cwd: Path | None = None) -> ChangedLines:
    base = Path(cwd or Path.cwd())
    try:
        cwd, root = _repository(base, paths)
    except GitError as exc:
        raise GitError(f"--diff-base {rev}: {exc}") from None
    try:
        _git(["rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}"], cwd)
    except GitError:
        raise GitError(f"--diff-base {rev}: unknown revision (not a commit in this repository)") from None
    specs = ["--", *(os.path.abspath(base / p) for p in paths)] if paths else []
    diff = parse_diff(_git(["diff", "--unified=0", "--no-color", "--no-ext-diff", rev, *specs], cwd))
    out = ChangedLines()
    for name, lines in diff.items():
        path = root / name
        if path.suffix == ".ipynb":
            old = _show(rev, name, root)
            new = path.read_text(encoding="utf-8-sig", errors="replace") if path.exists() else None
            if old is None:
                out.new_files.add(Path(os.path.abspath(path)))
            else:
                out.lines[Path(os.path.abspath(path))] = notebook_changes(old, new)
        else:
            out.lines[Path(os.path.abspath(path))] = {(0, ln) for ln in lines}
    untracked = _git(["ls-files", "--others", "--exclude-standard", "-z", *specs], cwd)
    out.new_files |= {Path(os.path.abspath(cwd / p)) for p in untracked.split("\0") if p}
    return out


def _show(rev: str, name: str, root: Path) -> str | None:
    try:
        return _git(["show", f"{rev}:{name}"], root)
    except GitError:
        return None  # the file is new since REV


def keep_changed(reports: list, changed: ChangedLines) -> int:
    """Drop findings outside the changed lines (suppressed ones too); returns how many were dropped."""
    dropped = 0
    for rep in reports:
        kept = [f for f in rep.findings if changed.touches(f)]
        dropped += len(rep.findings) - len(kept)
        rep.findings = kept
        rep.suppressed = [f for f in rep.suppressed if changed.touches(f)]
    return dropped
