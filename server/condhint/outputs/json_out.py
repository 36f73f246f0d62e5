"""The JSON document of design §4: every finding of severity info and above."""
from __future__ import annotations

import json
import math

from condhint import __version__
from condhint.findings import FileReport


def _clean(obj):
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else (None if math.isnan(obj) else ("inf" if obj > 0 else "-inf"))
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_clean(v) for v in obj]
    return obj


def document(reports: list[FileReport]) -> dict:
    return {
        "version": 1,
        "tool": {"name": "condhint", "version": __version__},
        "findings": [_clean(f.to_dict()) for r in reports for f in r.findings],
        "suppressed": len([f for r in reports for f in r.suppressed]),
        "files": [r.to_dict() for r in reports],
    }


def write(reports: list[FileReport], options: dict) -> str:
    return json.dumps(document(reports), indent=2, ensure_ascii=False) + "\n"
