"""The fuzz properties of tests/robustness/test_fuzz.py with many fresh examples (CI runs few, fixed ones).

    python tests/benchmarks/fuzz_long.py              # 500 examples per property
    python tests/benchmarks/fuzz_long.py 5000 -x      # more; extra arguments go to pytest

Hypothesis prints the smallest failing input it finds; add it to test_fuzz.py as an explicit example.
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def main(argv: list[str]) -> int:
    n = argv[0] if argv and argv[0].isdigit() else "500"
    extra = argv[1:] if argv and argv[0].isdigit() else argv
    env = {**os.environ, "CONDHINT_FUZZ_EXAMPLES": n}
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "--hypothesis-show-statistics",
           str(ROOT / "tests" / "robustness" / "test_fuzz.py"), *extra]
    return subprocess.call(cmd, cwd=ROOT, env=env)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
