"""--jobs, --shard and `condhint merge`: the same findings, in the same order, as one serial run."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from condhint.review.shard import Shard, parse_shard
from tests.review.support import MARRAM, cli, cli_json, without_timings


@pytest.fixture(scope="module")
def tree(tmp_path_factory) -> Path:
    """The demo package twice, in nested folders, so shards and subdirectory order both matter."""
    import shutil

    root = tmp_path_factory.mktemp("tree")
    shutil.copytree(MARRAM, root / "src" / "marram", ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copytree(MARRAM, root / "src" / "marram" / "old", ignore=shutil.ignore_patterns("__pycache__"))
    (root / "src" / "top.py").write_text("import math\ndef f(x):  # condhint: x in [1e-12, 1e-6]\n"
                                         "    return math.exp(x) - 1\n")
    return root / "src"


def test_parallel_run_equals_serial_run(tree: Path, capsys):
    serial = without_timings(cli_json(capsys, "check", str(tree), "--format", "json", "--jobs", "1"))
    parallel = without_timings(cli_json(capsys, "check", str(tree), "--format", "json", "--jobs", "2"))
    assert parallel == serial
    paths = [f["path"] for f in serial["files"]]
    # A folder's own files come before its subfolders' (the walk's order).
    assert paths.index(f"{tree}/top.py") < paths.index(f"{tree}/marram/__init__.py") \
        < paths.index(f"{tree}/marram/old/__init__.py")


@pytest.mark.parametrize("fmt", ["json", "sarif"])
def test_merged_shards_equal_the_unsharded_run(tree: Path, tmp_path: Path, capsys, fmt: str):
    whole = cli_json(capsys, "check", str(tree), "--format", fmt, "--min-severity", "info")
    parts = []
    for k in (1, 2, 3):
        out = tmp_path / f"shard{k}.{fmt}"
        code, _, err = cli(capsys, "check", str(tree), "--format", fmt, "--min-severity", "info",
                           "--shard", f"{k}/3", "--output", str(out))
        assert code in (0, 1), err
        parts.append(out)
    docs = [json.loads(p.read_text()) for p in parts]
    files = [({f["path"] for f in d["files"]} if fmt == "json" else
              {a["location"]["uri"] for a in d["runs"][0]["artifacts"]}) for d in docs]
    assert sum(len(f) for f in files) == 15 and not (files[0] & files[1] or files[1] & files[2] or files[0] & files[2])
    assert all(files), "with 15 files each of 3 shards gets some (sha-256 of the path)"
    merged = cli_json(capsys, "merge", *map(str, reversed(parts)), "--format", fmt)
    if fmt == "json":
        assert without_timings(merged) == without_timings(whole)
    else:
        assert merged == whole


def test_merge_refuses_mixed_or_foreign_inputs(tmp_path: Path, capsys):
    (tmp_path / "a.json").write_text(json.dumps({"version": 1, "findings": [], "files": []}))
    (tmp_path / "b.sarif").write_text(json.dumps({"version": "2.1.0", "runs": []}))
    (tmp_path / "c.json").write_text("[]")
    assert cli(capsys, "merge", str(tmp_path / "a.json"), str(tmp_path / "b.sarif"))[0] == 2
    assert cli(capsys, "merge", str(tmp_path / "c.json"))[0] == 2
    assert cli(capsys, "merge", str(tmp_path / "a.json"), "--format", "sarif")[0] == 2


def test_shard_assignment_is_stable_and_total():
    paths = [f"pkg/mod{i}.py" for i in range(200)]
    shards = [parse_shard(f"{k}/4") for k in range(1, 5)]
    owners = [[s.owns(p) for s in shards].count(True) for p in paths]
    assert owners == [1] * 200
    sizes = [sum(s.owns(p) for p in paths) for s in shards]
    assert min(sizes) > 25  # a hash spreads 200 paths roughly evenly (binomial, 50 ± 6)
    assert Shard(2, 4).owns("./pkg/mod7.py") == Shard(2, 4).owns("pkg/mod7.py")
    for bad in ("0/3", "4/3", "x", "1/0"):
        with pytest.raises(ValueError):
            parse_shard(bad)
