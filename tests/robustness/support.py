"""Helpers for the robustness tests: run the real command line in-process and read its JSON."""
from __future__ import annotations

import contextlib
import io
import json
import math
import time
from pathlib import Path
from typing import Any

import mpmath

from condhint.cli import main

# A formula every pathological file ends with, so each test can see that the rest of the file was analysed.
MARKER = "\n\nimport math\n\n\ndef marker(n):\n    return math.sqrt(n + 1) - math.sqrt(n)\n"
MARKER_EXPR = "math.sqrt(n + 1) - math.sqrt(n)"


def marker_loss_digits(n: float = 999_999.37) -> float:
    """Digits the marker loses in binary64 at n, against mpmath at 50 digits (reference: mpmath)."""
    got = math.sqrt(n + 1) - math.sqrt(n)
    with mpmath.workdps(50):
        exact = mpmath.sqrt(mpmath.mpf(n) + 1) - mpmath.sqrt(mpmath.mpf(n))
        rel = abs((mpmath.mpf(got) - exact) / exact)
    return math.log10(max(float(rel), 2.0**-53) / 2.0**-53)


def check_json(path: Path, *extra: str) -> tuple[dict[str, Any], int, float]:
    """`condhint check PATH --format json`: the document, the exit status and the wall time."""
    out = io.StringIO()
    t0 = time.perf_counter()
    with contextlib.redirect_stdout(out):
        rc = main(["check", str(path), "--format", "json", *extra])
    seconds = time.perf_counter() - t0
    text = out.getvalue()
    return (json.loads(text) if text.strip() else {}), rc, seconds


def write(tmp: Path, name: str, content: str | bytes) -> Path:
    p = tmp / name
    p.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return p


def marker_line(text: str) -> int:
    return text.splitlines().index(f"    return {MARKER_EXPR}") + 1


def codes_at(doc: dict[str, Any], line: int) -> list[str]:
    return [f["code"] for f in doc.get("findings", []) if f["line"] <= line <= f["end_line"]]
