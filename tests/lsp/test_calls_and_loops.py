"""Over the real server (issue 15): an edit to a callee re-analyses its caller, whose inlined finding appears
and disappears with it; a loop finding is published like any other."""
from __future__ import annotations

import pytest

from lsp_support import VSCODE, expect_diagnostics, open_document, replace_all, within

pytestmark = pytest.mark.asyncio

# The caller declares small angles; the helper cancels there (1 − cos t for t ≈ 1e-6 loses ≈ 12 digits:
# cos t ≈ 1 − t²/2, NIST DLMF ch. 4). Written stably, 2 sin²(t/2) (the same identity), it does not.
CALLS = """import math


def versine(x):
    return 1.0 - math.cos(x)


def half_versine(t):  # condhint: 1e-7 <= t <= 1e-5
    return versine(t) / 2.0
"""
STABLE = CALLS.replace("return 1.0 - math.cos(x)", "return 2.0 * math.sin(x / 2.0) ** 2")

CLOCK = """def simulate(dt):  # condhint: 0.01 <= dt <= 0.01
    t = 0.0
    for i in range(1000000):
        t += dt
    return t
"""


async def opened(lsp, path, text):
    """A server with `text` open at `path`, its URI and its first diagnostics."""
    client = await lsp(VSCODE, init_options={"debounceMs": 10})
    uri = path.resolve().as_uri()
    first = expect_diagnostics(client, uri, version=1)
    open_document(client, path, text)
    return client, uri, list((await within(first)).diagnostics)


async def test_editing_a_callee_reanalyses_the_caller(lsp, tmp_path):
    client, uri, diags = await opened(lsp, tmp_path / "angles.py", CALLS)
    flagged = [d for d in diags if d.code == "CH101" and d.message.find("`versine` (called at line 9)") >= 0]
    assert [d.range.start.line for d in flagged] == [4]  # 0-based: the subtraction inside `versine`
    second = expect_diagnostics(client, uri, version=2)
    replace_all(client, uri, STABLE, 2)
    assert [d.code for d in (await within(second)).diagnostics] == []
    third = expect_diagnostics(client, uri, version=3)
    replace_all(client, uri, CALLS, 3)
    assert [(d.code, d.range) for d in (await within(third)).diagnostics] == [(d.code, d.range) for d in diags]


async def test_a_clock_that_drifts_is_published(lsp, tmp_path):
    _, _, (d,) = await opened(lsp, tmp_path / "clock.py", CLOCK)
    assert d.code == "CH101" and d.range.start.line == 3 and "accumulates rounding error" in d.message
