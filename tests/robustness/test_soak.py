"""A short soak of the real server over stdio: thousands of incremental edits, memory sampled from /proc.

Each synchronised edit is one analysis, and each analysis leaves garbage cycles behind; the server keeps
full garbage collections off the editing path, and this checks that it still collects them when the user
never pauses (before that, resident memory grew by about 70 KiB per analysis, without end)."""
from __future__ import annotations

import json

import pytest

from tests.benchmarks import soak_lsp


@pytest.mark.slow
def test_memory_flattens_over_thousands_of_edits(tmp_path, capsys) -> None:
    out = tmp_path / "soak.json"
    status = soak_lsp.main(["--edits", "6000", "--every", "50", "--seconds", "240", "--json", str(out)])
    report = json.loads(out.read_text())
    assert report["exit_status"] == 0
    assert report["edits"] == 6000, "the soak ran out of time"
    assert report["flattens"], f"memory keeps growing: {capsys.readouterr().out}"
    assert status == 0
