"""What JSON and SARIF (verified fixes, κ formulas) cost over text: `check -j 1` in fresh processes, best of N,
cold (no disk cache), the formats interleaved; each output also compared with the previous run's of its
format, timings aside, to show what a run-to-run difference comes from.

Run: python tests/benchmarks/bench_formats.py [--repeat N] [--server DIR] PATH...
(`--server DIR`: the `server` folder of another checkout, to compare two versions side by side.)
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
MODES = {"text": ["--format", "text"], "json": ["--format", "json"], "sarif": ["--format", "sarif"],
         "json, warnings up": ["--format", "json", "--min-severity", "warning"],
         "text --mark-fixes": ["--format", "text", "--mark-fixes"]}


def run(server: Path, mode: list[str], paths: list[str]) -> tuple[float, str]:
    env = {**os.environ, "PYTHONPATH": str(server)}
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "condhint", "check", "-j", "1", *mode, *paths], env=env,
                          capture_output=True, text=True, timeout=3600, cwd="/")
    return time.perf_counter() - t0, proc.stdout


def without_timings(out: str) -> object:
    try:
        doc = json.loads(out)
    except ValueError:
        return out
    for f in doc.get("files", []):
        f.pop("seconds", None)
    for r in doc.get("runs", []):
        r.pop("invocations", None)
    return doc


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--server", type=Path, default=ROOT / "server")
    ap.add_argument("paths", nargs="+")
    args = ap.parse_args()
    best: dict[str, float] = {}
    last: dict[str, object] = {}
    for _ in range(args.repeat):
        for name, mode in MODES.items():
            seconds, out = run(args.server, mode, [str(Path(p).resolve()) for p in args.paths])
            best[name] = min(best.get(name, seconds), seconds)
            doc = without_timings(out)
            if name in last and last[name] != doc:
                print(f"  {name}: output differs from the previous run (budget cut-offs?)")
            last[name] = doc
    load = os.getloadavg()[0]
    print(f"\n| mode | best of {args.repeat} (s) | × text |\n|---|---:|---:|")
    for name, seconds in best.items():
        print(f"| {name} | {seconds:.1f} | {seconds / best['text']:.2f} |")
    print(f"\n(load average at the end: {load:.1f})")


if __name__ == "__main__":
    main()
