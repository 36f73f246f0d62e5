"""A real editor end to end: Debian's Neovim, headless, with the condhint server.

Neovim attaches the server to a copy of the demo's growth module, waits for diagnostics, hovers the first
avoidable loss, applies its quick fix and writes the buffer. The test checks the written file and the hover.
"""
from __future__ import annotations

import ast
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from condhint.config import Config
from condhint.engine import check_source

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "docs" / "examples" / "marram" / "growth.py"
SCRIPT = Path(__file__).with_name("neovim_session.lua")
SERVER = [sys.executable, "-m", "condhint", "serve"]


def nvim() -> str:
    path = shutil.which("nvim")
    if path is None:
        if os.environ.get("CI"):
            pytest.fail("nvim not found and CI is set: install it with `apt-get install -y neovim`")
        pytest.skip("nvim not found (install Debian's Neovim: apt-get install -y neovim)")
    return path


@pytest.mark.slow
def test_neovim_diagnostics_hover_quick_fix_and_write(tmp_path: Path) -> None:
    exe = nvim()
    work = tmp_path / "project"
    work.mkdir()
    (work / "pyproject.toml").write_text("[project]\nname = 'lab'\n")
    target = work / "growth.py"
    shutil.copy(DEMO, target)
    original = target.read_text()
    report_path = tmp_path / "report.json"
    env = {**os.environ, "CONDHINT_CMD": json.dumps(SERVER), "CONDHINT_CLIENTS": str(REPO / "editor_clients"),
           "CONDHINT_REPORT": str(report_path), "CONDHINT_WAIT": "60000"}
    proc = subprocess.run([exe, "--headless", "-u", "NONE", "-i", "NONE", "-n", "-c", f"luafile {SCRIPT}",
                           str(target)], env=env, cwd=work, capture_output=True, text=True, timeout=300,
                          stdin=subprocess.DEVNULL)
    assert report_path.exists(), f"no report; stderr:\n{proc.stderr}"
    report = json.loads(report_path.read_text())
    assert proc.returncode == 0 and report["ok"], (report, proc.stderr[-3000:])
    assert report["steps"] == ["attached", "diagnostics", "hover", "applied", "written", "updated"]

    # The first avoidable loss of the demo module is specific_growth_rate's log(n1) - log(n0) (docs/examples
    # README: CH101, 5.9 digits). Its hover gives κ, the digits lost and where the range came from.
    hover = report["hover"]
    assert "CH101 avoidable-loss" in hover and "κ ≈" in hover
    assert "digits lost to rounding:" in hover and "measured against mpmath" in hover
    assert "from a condhint comment" in hover

    # The written file is the edited buffer: still Python, the flagged formula gone (rewritten, or
    # silenced with an ignore comment), and condhint's own check no longer reports it.
    written = target.read_text()
    assert written != original
    ast.parse(written)
    flagged = "(log(n1) - log(n0)) / dt"
    assert flagged in original
    before = check_source(original, "growth.py", Config(kappa_formula=False)).findings
    after = check_source(written, "growth.py", Config(kappa_formula=False)).findings
    line = next(i for i, s in enumerate(original.splitlines(), 1) if flagged in s)
    assert any(f.span.line == line and f.code == "CH101" for f in before)
    if "ignore[CH101]" in report["applied"]:  # no verified rewrite (yet): the ignore comment
        assert "# condhint: ignore[CH101]" in written
    else:
        assert flagged not in written and "log1p" in written  # log(a) - log(b) = log1p((a - b)/b)
    assert not any(f.span.line == line and f.code == "CH101" for f in after)

    def avoidable(items: list) -> int:
        return sum(1 for d in items if d["code"] == "CH101")

    # What Neovim showed after the edit agrees: one avoidable loss fewer. (After the log1p rewrite the
    # large κ ≈ 2/|log(n1/n0)| may be reported as input sensitivity instead: the demo README notes it.)
    assert avoidable(report["after"]) == avoidable(report["before"]) - 1
    assert sum(1 for f in after if f.code == "CH101") == sum(1 for f in before if f.code == "CH101") - 1
