"""Markdown review comments, --statistics, and the progress bar (only on a terminal)."""
from __future__ import annotations

import os
import select
import subprocess
import sys
from collections import Counter
from pathlib import Path

from tests.review.support import MARRAM, cli, cli_json


def test_markdown_summary_has_one_row_per_shown_finding(capsys):
    doc = cli_json(capsys, "check", str(MARRAM), "--format", "json")
    code, out, _ = cli(capsys, "check", str(MARRAM), "--format", "markdown")
    assert code == 1
    shown = [f for f in doc["findings"] if f["severity"] in ("warning", "error")]  # like text: warnings and up
    rows = [ln for ln in out.splitlines() if ln.startswith("| ") and ("error |" in ln or "warning |" in ln)]
    assert len(rows) == len(shown)
    for f in shown:
        assert any(f"{f['path']}:{f['line']}:{f['column']}" in r and f["code"] in r for r in rows)
    n_err = sum(f["severity"] == "error" for f in shown)
    assert out.startswith(f"**condhint**: {n_err} errors, ") and "(1 suppressed in the code)" in out
    # A table cell must not be split by a `|` in an expression.
    from condhint.outputs.markdown import _code

    assert _code("a | b") == "`a \\| b`" and _code("x`y") == "`` x`y ``"


def test_statistics_count_findings_by_code(capsys):
    doc = cli_json(capsys, "check", str(MARRAM), "--format", "json")
    code, out, _ = cli(capsys, "check", str(MARRAM), "--statistics", "--min-severity", "info")
    table = out[out.index("code   name"):].splitlines()
    counts = Counter(f["code"] for f in doc["findings"])
    for code_, n in counts.items():
        (row,) = [r for r in table if r.startswith(code_)]
        cells = row.split()
        assert int(cells[2]) == n
        worst = max(f["digits_lost"] for f in doc["findings"] if f["code"] == code_)
        assert abs(float(cells[-1]) - worst) <= 0.051  # the JSON rounds to 2 decimals, the table to 1
    assert [r for r in table if r.startswith("all")][0].split()[1:] == [str(len(doc["findings"])),
                                                                      str(doc["suppressed"])]


def test_progress_only_on_a_terminal(tmp_path: Path):
    for i in range(3):
        (tmp_path / f"m{i}.py").write_text(f"def f{i}(x):\n    return x * {i + 2}.0\n")
    cmd = [sys.executable, "-m", "condhint", "check", str(tmp_path), "--jobs", "1"]
    plain = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert plain.returncode == 0 and plain.stderr == ""
    leader, follower = os.openpty()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=follower, env={**os.environ, "COLUMNS": "80"})
    os.close(follower)
    seen = b""
    try:
        while True:
            ready, _, _ = select.select([leader], [], [], 60)
            assert ready, "no output on the terminal within 60 s"
            try:
                chunk = os.read(leader, 4096)
            except OSError:  # the terminal closed with the process
                break
            if not chunk:
                break
            seen += chunk
    finally:
        os.close(leader)
        proc.wait(timeout=60)
    assert proc.returncode == 0
    assert b"condhint" in seen and b"3/3" in seen
