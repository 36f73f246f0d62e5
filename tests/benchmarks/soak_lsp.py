"""Soak the real language server: thousands of edits to a numeric module, bounded in count and time, with
the server's resident memory sampled as it goes. Memory must flatten: the growth over the second half of
the run has to be a small part of the growth over the first.

    python tests/benchmarks/soak_lsp.py                  # 3,000 edits or 180 s, whichever comes first
    python tests/benchmarks/soak_lsp.py --edits 10000 --seconds 600 --json soak.json

Every edit is an incremental didChange that alters one constant in a function (so each version differs and
its diagnostics are recomputed); every `--every` edits the script waits (with a timeout) for the diagnostics
of the latest version, asks for a hover, and samples VmRSS from /proc.
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.robustness.lsp_raw import RawServer  # noqa: E402

URI = "file:///tmp/condhint-soak/module.py"


def module(copies: int) -> tuple[str, list[int]]:
    """A numeric module of `copies` functions; the lines holding the constant each edit changes."""
    parts, lines = ["import math\n"], []
    for i in range(copies):
        parts.append(f"\n\ndef area_{i}(a, b, c):\n    # condhint: 1 <= a <= 100, 1 <= b <= 100, 1 <= c <= 100\n"
                     f"    s = (a + b + c) / 2.0\n    k = 1.000\n"
                     f"    return k * math.sqrt(s * (s - a) * (s - b) * (s - c)) - math.sqrt(a * a + 1) + a\n")
    text = "".join(parts)
    for n, line in enumerate(text.split("\n")):
        if line.strip().startswith("k = 1."):
            lines.append(n)
    return text, lines


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--edits", type=int, default=3000)
    ap.add_argument("--seconds", type=float, default=180.0)
    ap.add_argument("--copies", type=int, default=40, help="functions in the edited module (7 lines each)")
    ap.add_argument("--every", type=int, default=100, help="sample and synchronise every N edits")
    ap.add_argument("--json", metavar="FILE")
    args = ap.parse_args(argv)

    text, targets = module(args.copies)
    server = RawServer()
    server.initialize()
    t0 = time.monotonic()
    server.open(URI, text, 1)
    server.diagnostics(URI, 1, timeout=120)
    first = time.monotonic() - t0
    samples: list[dict[str, float]] = [{"edits": 0, "rss_mib": server.rss_kib() / 1024, "seconds": 0.0}]
    version, edits, latencies = 1, 0, []
    t_start = time.monotonic()
    while edits < args.edits and time.monotonic() - t_start < args.seconds:
        line = targets[edits % len(targets)]
        digit = str(edits % 10)
        version += 1
        server.notify("textDocument/didChange", {
            "textDocument": {"uri": URI, "version": version},
            "contentChanges": [{"range": {"start": {"line": line, "character": 12},
                                          "end": {"line": line, "character": 13}}, "text": digit}]})
        edits += 1
        if edits % args.every == 0:
            t_sync = time.monotonic()
            server.diagnostics(URI, version, timeout=120)
            latencies.append(time.monotonic() - t_sync)
            server.call("textDocument/hover", {"textDocument": {"uri": URI},
                                               "position": {"line": targets[0] + 1, "character": 20}})
            samples.append({"edits": edits, "rss_mib": round(server.rss_kib() / 1024, 1),
                            "seconds": round(time.monotonic() - t_start, 1)})
    rc = server.close()
    half = len(samples) // 2
    rss = [s["rss_mib"] for s in samples]
    growth_first = rss[half] - rss[0] if samples else 0.0
    growth_second = rss[-1] - rss[half] if samples else 0.0
    flat = growth_second <= max(0.5 * max(growth_first, 0.0), 2.0)  # MiB: below 2 MiB is allocator noise
    report = {"edits": edits, "seconds": round(time.monotonic() - t_start, 1), "first_diagnostics_s": round(first, 2),
              "lines": text.count("\n"), "rss_start_mib": rss[0], "rss_end_mib": rss[-1],
              "growth_first_half_mib": round(growth_first, 1), "growth_second_half_mib": round(growth_second, 1),
              "flattens": flat, "sync_latency_max_s": round(max(latencies, default=0.0), 2),
              "exit_status": rc, "samples": samples}
    print(json.dumps({k: v for k, v in report.items() if k != "samples"}, indent=2))
    if args.json:
        Path(args.json).write_text(json.dumps(report, indent=2))
    return 0 if flat and rc == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
