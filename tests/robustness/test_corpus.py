"""Real code nobody here wrote: `check` over a fixed subset of the installed numpy, scipy, sympy and mpmath.

The subset (90 files of at most 30 kB per package, chosen by a hash of their paths) took 34 s for 334 files
and 88,000 lines on the shared 2-core machine, the slowest file 8 s. docs/robustness.md has the figures for
the whole corpus and a reading of the warnings it raises.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
BENCH = ROOT / "tests" / "benchmarks" / "bench_corpus.py"
PER_FILE_SECONDS = 30.0  # each file, all its sites included (a site alone is bounded by cfg.site_budget)


@pytest.mark.slow
def test_corpus_subset_has_no_crash_and_bounded_time(tmp_path: Path) -> None:
    out = tmp_path / "corpus.json"
    proc = subprocess.run([sys.executable, str(BENCH), "--per-package", "90", "--max-bytes", "30000",
                           "--json", str(out), "--no-sites", "--quiet", "--file-timeout", str(PER_FILE_SECONDS)],
                          capture_output=True, text=True, timeout=900, cwd=ROOT)
    assert out.exists(), proc.stderr[-3000:]
    doc = json.loads(out.read_text())
    assert doc["crashes"] == 0, doc["crash_tracebacks"]
    assert doc["files"] >= 300 and doc["lines"] >= 50_000, (doc["files"], doc["lines"])
    assert set(doc["by_package"]) == {"numpy", "scipy", "sympy", "mpmath"}
    slow = [f for f in doc["per_file"] if f["seconds"] > PER_FILE_SECONDS]
    assert slow == [], slow
    assert set(doc["status"]) <= {"ok", "syntax-error"}, doc["status"]
    assert proc.returncode == 0, proc.stderr[-3000:]
