"""The VS Code extension: its unit tests (`npm test`: type check against the VS Code 1.82 API,
then Node's test runner) and, marked slow, packaging into a .vsix."""
from __future__ import annotations

import json
import re
import zipfile
from pathlib import Path

import pytest

from editor_support import CLIENTS, require, require_program, run

VSCODE = CLIENTS / "vscode"


@pytest.fixture(scope="module")
def npm() -> str:
    npm = require_program("npm", "apt-get install -y nodejs npm (Node.js 20)")
    require((VSCODE / "node_modules").is_dir(),
            "editor_clients/vscode/node_modules is missing; run: cd editor_clients/vscode && npm ci")
    return npm


def test_npm_test(npm: str) -> None:
    proc = run([npm, "test"], timeout=300, cwd=VSCODE)
    assert proc.returncode == 0, proc.stdout[-4000:] + proc.stderr[-4000:]
    # Node's runner prints its totals: make sure tests ran and none failed.
    passed = re.search(r"^# pass (\d+)$", proc.stdout, re.M)
    failed = re.search(r"^# fail (\d+)$", proc.stdout, re.M)
    assert passed and int(passed.group(1)) > 0, proc.stdout[-2000:]
    assert failed and int(failed.group(1)) == 0


@pytest.mark.slow
def test_package_vsix(npm: str, tmp_path: Path) -> None:
    out = tmp_path / "condhint.vsix"
    proc = run([npm, "run", "package", "--", "--out", str(out)], timeout=300, cwd=VSCODE)
    assert proc.returncode == 0, proc.stdout[-4000:] + proc.stderr[-4000:]
    with zipfile.ZipFile(out) as vsix:
        names = set(vsix.namelist())
        manifest = json.loads(vsix.read("extension/package.json"))
    for needed in ("extension/src/extension.js", "extension/src/config.js", "extension/images/icon.png",
                   "extension/node_modules/vscode-languageclient/package.json"):
        assert needed in names, needed
    # Development-only files stay out of the package.
    assert not any(n.startswith(("extension/test/", "extension/node_modules/typescript/",
                                 "extension/node_modules/@vscode/vsce/")) for n in names)
    assert manifest["name"] == "condhint" and manifest["main"] == "./src/extension.js"
