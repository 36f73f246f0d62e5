"""Shared helpers of the labelled real-code set (issue 12): load the file, digest expressions, match findings."""
from __future__ import annotations

import hashlib
import importlib.metadata
import json
import re
import sysconfig
from pathlib import Path
from typing import Any, Iterable

HERE = Path(__file__).parent
LABELS = HERE / "labelled_real_code.json"
FIXES = HERE / "labelled_fixes.json"  # round one: fixes of an older tool, kept as history
FIXES_CURRENT = HERE / "labelled_fixes_current.json"  # fixes the tool offers now
FIXES_FAMILIES = HERE / "labelled_fixes_families.json"  # every fix offered on the set's real findings (issue 16)
VERDICTS = ("real", "range-guess", "wrong")
SEVERE = ("warning", "error")


def digest(expression: str) -> str:
    """Short digest of an expression's text, blind to whitespace, to re-find a finding when messages change."""
    return hashlib.sha1(re.sub(r"\s+", "", expression).encode()).hexdigest()[:12]


def load(path: Path = LABELS) -> dict[str, Any]:
    return json.loads(path.read_text(encoding="utf-8"))


def site_packages() -> Path:
    return Path(sysconfig.get_paths()["purelib"])


def installed_version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def matches(record: dict[str, Any], path: str, line: int, code: str, expression: str) -> bool:
    """Same finding: path relative to site-packages, line within ±2, code and expression digest."""
    return (path == record["path"] and abs(line - record["line"]) <= 2 and code == record["code"]
            and digest(expression) == record["digest"])


def match_all(records: Iterable[dict[str, Any]], found: list[tuple[str, int, str, str]]
              ) -> dict[int, tuple[str, int, str, str]]:
    """Record index -> the current finding (rel path, line, code, expression) it matches, nearest line first."""
    out: dict[int, tuple[str, int, str, str]] = {}
    taken: set[int] = set()
    for i, rec in enumerate(records):
        cands = [(abs(f[1] - rec["line"]), j) for j, f in enumerate(found)
                 if j not in taken and matches(rec, *f)]
        if cands:
            j = min(cands)[1]
            taken.add(j)
            out[i] = found[j]
    return out
