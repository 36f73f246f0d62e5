"""Editing latency of the real language server over stdio, on a generated 1,000-line numeric module.

Measures, as a client sees them (from sending the message to receiving the answer):
- open -> first diagnostics;
- a one-line edit -> updated diagnostics, with the default debounce (50 ms) included, over 40 edits that
  each change a literal (so the edited expression is analysed again);
- hover on flagged expressions, the first time and from cache;
and, as references on the same text in the same run, `ast.parse` and pyflakes.
Targets (design §5): edit p95 <= 150 ms, hover p95 <= 50 ms from cache, first diagnostics <= 1.5 s.

Run: python tests/benchmarks/bench_lsp_latency.py [LINES]
"""
from __future__ import annotations

import ast
import asyncio
import re
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "lsp"))

from lsprotocol import types  # noqa: E402

from lsp_support import NEOVIM_07, expect_diagnostics, open_document, running, within  # noqa: E402
from tests.benchmarks.numeric_module import best_of, numeric_module, pyflakes_check  # noqa: E402

EDITS = 40
HOVERS = 40
_LITERAL = re.compile(r"(?<![\w.])(\d+\.\d+)(?![\w.])")


def pct(values: list[float], p: float) -> float:
    """The p-th percentile (nearest rank) of a list of seconds, in milliseconds."""
    ordered = sorted(values)
    k = max(0, min(len(ordered) - 1, int(round(p / 100 * len(ordered) + 0.5)) - 1))
    return 1000 * ordered[k]


def pyflakes_seconds(text: str) -> float:
    return best_of(lambda: pyflakes_check(text), repeat=5)


def edit_lines(lines: list[str]) -> list[int]:
    """0-based lines inside function bodies that hold a float literal to change."""
    return [i for i, s in enumerate(lines) if s.startswith("    ") and _LITERAL.search(s) and "condhint" not in s]


async def measure(text: str) -> dict[str, float | int]:
    lines = text.split("\n")
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        # Neovim 0.7's capabilities (push diagnostics, UTF-16), as Debian's editors; the default settings.
        async with running(NEOVIM_07, root) as client:
            path = root / "numeric.py"
            uri = path.resolve().as_uri()
            first = expect_diagnostics(client, uri, version=1)
            t0 = time.perf_counter()
            open_document(client, path, text)
            params = await within(first, 120)
            t_open = time.perf_counter() - t0
            flagged = [d for d in params.diagnostics if d.code != "CH001"]

            # One-line edits: a literal changes, so that expression is analysed again (nothing cached).
            candidates = edit_lines(lines)
            edits = []
            for k in range(EDITS):
                i = candidates[(k * 37) % len(candidates)]
                old = lines[i]
                m = _LITERAL.search(old)
                new = old[: m.start()] + f"{float(m.group(1)) + (k + 1) * 1e-3:.4f}" + old[m.end():]
                lines[i] = new
                version = k + 2
                done = expect_diagnostics(client, uri, version=version)
                t0 = time.perf_counter()
                client.text_document_did_change(types.DidChangeTextDocumentParams(
                    text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
                    content_changes=[types.TextDocumentContentChangePartial(
                        range=types.Range(start=types.Position(line=i, character=0),
                                          end=types.Position(line=i, character=len(old))), text=new)]))
                await within(done, 60)
                edits.append(time.perf_counter() - t0)
            stats = await within(client.workspace_execute_command_async(types.ExecuteCommandParams(
                command="condhint.statistics", arguments=[uri])))

            # Hovers on the flagged operations (by the diagnostics of the last version).
            current = client.diagnostics[uri]
            spots = [types.Position(line=d.range.start.line,
                                    character=(d.range.start.character + d.range.end.character) // 2)
                     for d in current if d.range.start.line == d.range.end.line][:10] or \
                [d.range.start for d in flagged[:10]]

            async def hover(pos: types.Position) -> float:
                t0 = time.perf_counter()
                h = await within(client.text_document_hover_async(types.HoverParams(
                    text_document=types.TextDocumentIdentifier(uri=uri), position=pos)))
                assert h is not None and "κ ≈" in h.contents.value
                return time.perf_counter() - t0

            first_hovers = [await hover(p) for p in spots]
            cached = [await hover(spots[k % len(spots)]) for k in range(HOVERS)]
    return {"open": t_open, "findings": len(flagged), "edit_p50": pct(edits, 50), "edit_p95": pct(edits, 95),
            "edit_max": 1000 * max(edits), "hover_first_p50": pct(first_hovers, 50),
            "hover_first_max": 1000 * max(first_hovers), "hover_p50": pct(cached, 50), "hover_p95": pct(cached, 95),
            "server_edit_seconds": float(stats["seconds"]), "analysed": int(stats["analysed"]),
            "pieces": int(stats["pieces"])}


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    text = numeric_module(n)
    lines = text.count("\n")
    r = asyncio.run(measure(text))
    t_parse = best_of(lambda: ast.parse(text), repeat=5)
    t_flakes = pyflakes_seconds(text)
    print(f"condhint language server on a generated {lines}-line numeric module ({r['findings']} findings), "
          f"over stdio")
    print(f"  open -> first diagnostics   {1000 * r['open']:8.0f} ms      (target <= 1500 ms)")
    print(f"  one-line edit -> diagnostics {r['edit_p50']:7.0f} ms p50, {r['edit_p95']:.0f} ms p95, "
          f"{r['edit_max']:.0f} ms max over {EDITS} edits (debounce 50 ms included; target p95 <= 150 ms)")
    print(f"      last edit on the server: {1000 * r['server_edit_seconds']:.1f} ms, "
          f"{r['analysed']} of {r['pieces']} parts re-analysed")
    print(f"  hover, first time            {r['hover_first_p50']:7.1f} ms p50, {r['hover_first_max']:.1f} ms max")
    print(f"  hover, from cache            {r['hover_p50']:7.1f} ms p50, {r['hover_p95']:.1f} ms p95 over {HOVERS} "
          f"(target p95 <= 50 ms)")
    print(f"  references on the same text: ast.parse {1000 * t_parse:.1f} ms, pyflakes {1000 * t_flakes:.1f} ms "
          f"(best of 5, in process)")


if __name__ == "__main__":
    main()
