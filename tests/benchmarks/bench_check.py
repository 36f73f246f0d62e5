"""Headless throughput: `condhint check` beside `ast.parse` and pyflakes on the same files, in one run.

Run: python tests/benchmarks/bench_check.py
"""
from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from condhint.config import Config  # noqa: E402
from condhint.engine import AnalysisCache, analyse_module  # noqa: E402
from tests.benchmarks.numeric_module import best_of, numeric_module, pyflakes_check  # noqa: E402


def row(label: str, text: str, repeat: int = 3) -> None:
    lines = text.count("\n")
    cfg = Config(kappa_formula=False)  # as `check --format text`; formulas are memoised per process anyway
    t_parse = best_of(lambda: ast.parse(text), repeat)
    t_flakes = best_of(lambda: pyflakes_check(text), repeat)
    t_cold = best_of(lambda: analyse_module(text, "m.py", cfg, cache=None), repeat)
    warm = AnalysisCache()
    analyse_module(text, "m.py", cfg, cache=warm)
    t_warm = best_of(lambda: analyse_module(text, "m.py", cfg, cache=warm), repeat)
    print(f"{label:<22} {lines:>7} {lines / t_cold:>10.0f} {lines / t_warm:>10.0f} {t_cold / t_parse:>9.0f}x "
          f"{t_cold / t_flakes:>9.1f}x   parse {lines / t_parse:>9.0f} l/s, pyflakes {lines / t_flakes:>8.0f} l/s")


def main() -> None:
    print("lines/s of analyse_module without the analysis cache and with a warm one, and ratios of the uncached\n"
          "time to ast.parse and pyflakes on the same text (best of 3)")
    print(f"{'file':<22} {'lines':>7} {'uncached':>10} {'cached':>10} {'vs parse':>10} {'vs flakes':>10}")
    row("generated 1,000", numeric_module(1000))
    row("generated 10,000", numeric_module(10000), repeat=1)
    demo = "\n".join(p.read_text() for p in sorted((ROOT / "docs/examples/marram").glob("*.py")))
    row("demo (marram)", demo)


if __name__ == "__main__":
    main()
