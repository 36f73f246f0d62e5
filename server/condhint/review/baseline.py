"""Baselines: accept today's findings, report only new ones.

A finding is recorded by `Finding.fingerprint()` (file, scope, code, the expression's text; no line
numbers), so inserting or deleting unrelated lines keeps it matched. The file path in the fingerprint is
taken relative to the baseline file's directory, so the baseline works from any working directory.
Equal fingerprints (the same expression twice in one function) are counted: with two recorded and three
found, the last one is new.
"""
from __future__ import annotations

import json
import os
from collections import Counter
from dataclasses import replace
from pathlib import Path

from condhint import __version__
from condhint.atomic import write_text_atomic
from condhint.findings import FileReport, Finding
from condhint.sourcefile import UnreadableFile, read_json

KIND = "condhint-baseline"


class BaselineError(Exception):
    """An unreadable or foreign baseline file (a usage error)."""


def _relative(path: str, base: Path) -> str:
    return Path(os.path.relpath(os.path.abspath(path), base)).as_posix()


def key(f: Finding, base: Path) -> str:
    return replace(f, path=_relative(f.path, base)).fingerprint()


def write_baseline(file: Path, reports: list[FileReport]) -> int:
    """Record every reported finding; returns how many."""
    base = Path(os.path.abspath(file)).parent
    counts: Counter[str] = Counter()
    about: dict[str, dict] = {}
    for rep in reports:
        for f in rep.findings:
            k = key(f, base)
            counts[k] += 1
            about.setdefault(k, {"path": _relative(f.path, base), "scope": f.scope, "code": f.code,
                                 "expression": " ".join(f.expression.split())})
    entries = [{"fingerprint": k, "count": counts[k], **about[k]}
               for k in sorted(counts, key=lambda k: (about[k]["path"], about[k]["scope"], about[k]["code"], k))]
    doc = {"kind": KIND, "version": 1, "tool": {"name": "condhint", "version": __version__}, "findings": entries}
    write_text_atomic(Path(file), json.dumps(doc, indent=2, ensure_ascii=False) + "\n")
    return sum(counts.values())


def read_baseline(file: Path) -> Counter[str]:
    try:
        doc = read_json(Path(file))
    except UnreadableFile as exc:
        hint = " (create it with --write-baseline)" if str(exc) == "no such file" else ""
        raise BaselineError(f"--baseline {file}: {exc}{hint}") from None
    if not isinstance(doc, dict) or doc.get("kind") != KIND or not isinstance(doc.get("findings"), list):
        raise BaselineError(f"--baseline {file}: not a condhint baseline")
    counts: Counter[str] = Counter()
    for e in doc["findings"]:
        if isinstance(e, dict) and isinstance(e.get("fingerprint"), str):
            n = e.get("count", 1)
            counts[e["fingerprint"]] += n if isinstance(n, int) and n > 0 else 1
    return counts


def keep_new(reports: list[FileReport], file: Path, accepted: Counter[str]) -> int:
    """Drop the findings the baseline accepts (in file order); returns how many were dropped."""
    base = Path(os.path.abspath(file)).parent
    budget = Counter(accepted)
    dropped = 0
    for rep in reports:
        kept = []
        for f in rep.findings:
            k = key(f, base)
            if budget[k] > 0:
                budget[k] -= 1
                dropped += 1
            else:
                kept.append(f)
        rep.findings = kept
    return dropped
