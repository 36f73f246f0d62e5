"""Helpers for the review tests: the CLI through `main(argv)`, the demo package, temporary git repositories."""
from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from condhint.cli import main

ROOT = Path(__file__).resolve().parents[2]
MARRAM = ROOT / "docs" / "examples" / "marram"
GIT_ENV = {"GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.invalid", "GIT_COMMITTER_NAME": "t",
           "GIT_COMMITTER_EMAIL": "t@example.invalid", "GIT_CONFIG_NOSYSTEM": "1", "HOME": "/nonexistent"}


def cli(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def cli_json(capsys, *argv: str) -> dict:
    code, out, err = cli(capsys, *argv)
    assert code in (0, 1), err
    return json.loads(out)


def git(repo: Path, *args: str) -> str:
    env = {**os.environ, **GIT_ENV}
    return subprocess.run(["git", *args], cwd=repo, env=env, check=True, capture_output=True, text=True,
                          timeout=60).stdout


@pytest.fixture
def marram_repo(tmp_path: Path, monkeypatch) -> Path:
    """A git repository holding a copy of the demo package, committed once; the working directory is its top."""
    repo = tmp_path / "repo"
    shutil.copytree(MARRAM, repo / "marram", ignore=shutil.ignore_patterns("__pycache__"))
    git(repo.parent, "init", "-q", "-b", "main", str(repo))
    git(repo, "add", "marram")
    git(repo, "commit", "-q", "-m", "demo")
    monkeypatch.chdir(repo)
    return repo


def without_timings(doc: dict) -> dict:
    for f in doc["files"]:
        f.pop("seconds", None)
    return doc
