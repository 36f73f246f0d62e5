"""Fix search speed: seconds per finding, and checking with and without fixes on the same files.

Run: python tests/benchmarks/bench_fixes.py
"""
from __future__ import annotations

import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from condhint.config import Config  # noqa: E402
from condhint.fixing import attach_fixes
from condhint.engine import AnalysisCache, analyse_module  # noqa: E402
from condhint.fixing import fixes_for  # noqa: E402
from condhint.rewrites import FIXABLE  # noqa: E402
from tests.benchmarks.numeric_module import numeric_module  # noqa: E402


def per_finding(files: dict[str, str]) -> list[tuple[str, str, float, int, str]]:
    """(file, expression, seconds, fixes offered, rule of the best) for every fixable finding."""
    cfg = Config()
    rows = []
    for name, text in files.items():
        ma = analyse_module(text, name, cfg)
        for f in ma.report.findings:
            if f.category not in FIXABLE:
                continue
            t0 = time.perf_counter()
            found = fixes_for(f, ma, cfg)
            rows.append((name, f.expression, time.perf_counter() - t0, len(found), found[0].rule if found else "-"))
    return rows


def check_times(label: str, text: str) -> None:
    # κ formulas (sympy, cached per process) are the same work with or without fixes: left out of both.
    cfg = Config(kappa_formula=False)
    analyse_module(text, "m.py", cfg, cache=AnalysisCache())  # warm-up: imports, first-use costs
    t0 = time.perf_counter()
    plain = analyse_module(text, "m.py", cfg, cache=AnalysisCache())
    t_plain = time.perf_counter() - t0
    t0 = time.perf_counter()
    fixed = analyse_module(text, "m.py", cfg, cache=AnalysisCache())
    attach_fixes(fixed, Config())
    t_fixes = time.perf_counter() - t0
    n = sum(1 for f in plain.report.findings if f.category in FIXABLE)
    offered = sum(1 for f in fixed.report.findings if f.fixes)
    print(f"{label:<20} {text.count(chr(10)):>6} lines  check {t_plain:6.2f} s   check with fixes {t_fixes:6.2f} s   "
          f"fixable findings {n:>3}, with a verified fix {offered:>3}")


def main() -> None:
    demo = {p.name: p.read_text() for p in sorted((ROOT / "docs/examples/marram").glob("*.py"))}
    generated = numeric_module(1000)
    print("checking with and without fixes (fresh analysis caches, κ formulas off in both)")
    check_times("demo (marram)", "\n".join(demo.values()))
    check_times("generated 1,000", generated)
    print("\nfix search per finding (fixes_for alone; the file's analysis is done before timing)")
    rows = per_finding(demo)
    for name, expr, secs, n, rule in rows:
        print(f"  {name:<14} {expr[:40]:<40} {secs:6.3f} s  {n} fix(es)  best: {rule}")
    times = sorted(r[2] for r in rows)
    print(f"  demo: {len(rows)} findings, median {statistics.median(times):.3f} s, "
          f"p90 {times[int(0.9 * (len(times) - 1))]:.3f} s, max {times[-1]:.3f} s")
    rows = per_finding({"generated.py": generated})
    times = sorted(r[2] for r in rows)
    if times:
        print(f"  generated 1,000 lines: {len(rows)} findings, median {statistics.median(times):.3f} s, "
              f"max {times[-1]:.3f} s, {sum(1 for r in rows if r[3])} with a fix")
    with tempfile.TemporaryDirectory() as tmp:
        copy = Path(tmp) / "examples"
        shutil.copytree(ROOT / "docs/examples", copy, ignore=shutil.ignore_patterns("__pycache__"))
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "condhint", "fix", "marram"], cwd=copy, capture_output=True,
                              text=True, timeout=600)
        t_fix = time.perf_counter() - t0
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "condhint", "check", "--jobs", "1", "marram"], cwd=copy,
                       capture_output=True, text=True, timeout=600)
        t_check = time.perf_counter() - t0
    print(f"\n`condhint fix marram` (new process): {t_fix:.2f} s ({proc.stdout.strip().splitlines()[-1]}); "
          f"`condhint check` of the fixed package: {t_check:.2f} s")


if __name__ == "__main__":
    main()
