"""The pre-commit hook manifest: valid for the framework, and its entry checks the files it is given."""
from __future__ import annotations

import os
import shlex
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from tests.review.support import GIT_ENV, ROOT, git

MANIFEST = ROOT / ".pre-commit-hooks.yaml"
BAD = "import math\n\n\ndef f(x):  # condhint: x in [1e6, 1e15]\n    return math.sqrt(x + 1) - math.sqrt(x)\n"


def test_manifest_entry_checks_the_given_files(tmp_path: Path):
    (hook,) = yaml.safe_load(MANIFEST.read_text())
    assert hook["id"] == "condhint" and hook["language"] == "python" and "python" in hook["types_or"]
    (tmp_path / "a.py").write_text(BAD)
    (tmp_path / "b.py").write_text("def g(y):\n    return 2.0 * y\n")
    argv = shlex.split(hook["entry"]) + hook.get("args", [])
    assert argv[:2] == ["condhint", "check"]
    run = subprocess.run([sys.executable, "-m", "condhint", *argv[1:], "a.py", "b.py"], cwd=tmp_path,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 1 and "a.py:5:12: error:" in run.stdout and "b.py" not in run.stdout


def test_manifest_is_valid_for_the_framework():
    clientlib = pytest.importorskip("pre_commit.clientlib")
    (hook,) = clientlib.load_manifest(str(MANIFEST))
    assert hook["pass_filenames"] and hook["require_serial"]


@pytest.mark.slow
def test_pre_commit_runs_the_hook_from_this_repository(tmp_path: Path):
    """pre-commit builds the hook's environment from the committed repository and runs it on a file."""
    pytest.importorskip("pre_commit")
    if not (ROOT / ".git").exists() or "pre-commit-hooks" not in git(ROOT, "ls-files", ".pre-commit-hooks.yaml"):
        pytest.skip("needs this repository as a git checkout with the manifest committed")
    work = tmp_path / "proj"
    git(tmp_path, "init", "-q", str(work))
    (work / "a.py").write_text(BAD)
    git(work, "add", "a.py")
    env = {**os.environ, **GIT_ENV, "PRE_COMMIT_HOME": str(tmp_path / "cache")}
    run = subprocess.run([sys.executable, "-m", "pre_commit", "try-repo", str(ROOT), "condhint", "--files", "a.py"],
                         cwd=work, env=env, capture_output=True, text=True, timeout=900)
    assert run.returncode == 1, run.stdout + run.stderr
    assert "a.py:5:12: error:" in run.stdout and "[CH101]" in run.stdout
