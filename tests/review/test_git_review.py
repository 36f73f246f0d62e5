"""--diff-base and baselines in a temporary git repository holding the demo package."""
from __future__ import annotations

import json
from pathlib import Path

from tests.review.support import cli, cli_json, git

# counting.py: line 17 is `return 1.0 / n - 1.0 / (n + 1)` (CH101, docs/examples/README.md), line 11 the
# square-root difference (CH101), line 23 the asinh formula (CH101).
NEW_FUNCTION = "\n\ndef relative_step(m):  # condhint: m in [1e6, 1e12]\n    return math.sqrt(m + 2) - math.sqrt(m)\n"


def locations(doc: dict) -> set[tuple[str, int]]:
    return {(f["path"], f["line"]) for f in doc["findings"]}


def test_diff_base_keeps_findings_on_changed_lines_only(marram_repo: Path, capsys):
    before = cli_json(capsys, "check", "marram", "--format", "json")
    assert ("marram/counting.py", 17) in locations(before) and ("marram/counting.py", 11) in locations(before)
    counting = marram_repo / "marram" / "counting.py"
    lines = counting.read_text().split("\n")
    assert lines[16].strip() == "return 1.0 / n - 1.0 / (n + 1)"
    lines[16] = lines[16].replace("(n + 1)", "(n + 1.0)")  # changed: a finding's line
    counting.write_text("\n".join(lines) + NEW_FUNCTION)  # added: a new function with a finding
    n_lines = len(lines) + NEW_FUNCTION.count("\n")
    (marram_repo / "marram" / "fresh.py").write_text("import math\n" + NEW_FUNCTION)  # untracked: new in full

    after = cli_json(capsys, "check", "marram", "--format", "json", "--diff-base", "HEAD")
    assert locations(after) == {("marram/counting.py", 17), ("marram/counting.py", n_lines - 1),
                                ("marram/fresh.py", 5)}
    # Committing the edits leaves nothing changed since HEAD; the previous commit still sees them.
    git(marram_repo, "add", "-A")
    git(marram_repo, "commit", "-q", "-m", "edit")
    assert cli_json(capsys, "check", "marram", "--format", "json", "--diff-base", "HEAD")["findings"] == []
    assert locations(cli_json(capsys, "check", "marram", "--format", "json", "--diff-base", "HEAD~1")) == \
        locations(after)


def test_diff_base_errors_are_usage_errors(marram_repo: Path, tmp_path: Path, capsys, monkeypatch):
    code, _, err = cli(capsys, "check", "marram", "--diff-base", "no-such-rev")
    assert code == 2 and "unknown revision" in err
    outside = tmp_path / "plain"
    outside.mkdir()
    (outside / "a.py").write_text("x = 1.0\n")
    monkeypatch.chdir(outside)
    code, _, err = cli(capsys, "check", "a.py", "--diff-base", "HEAD")
    assert code == 2 and "not inside a git repository" in err


def test_baseline_survives_inserting_lines_above_a_finding(marram_repo: Path, capsys):
    base = marram_repo / "condhint-baseline.json"
    code, _, err = cli(capsys, "check", "marram", "--write-baseline", str(base))
    assert code == 0 and "to the baseline" in err
    recorded = json.loads(base.read_text())
    total = cli_json(capsys, "check", "marram", "--format", "json")["findings"]
    assert sum(e["count"] for e in recorded["findings"]) == len(total)
    assert cli_json(capsys, "check", "marram", "--format", "json", "--baseline", str(base))["findings"] == []

    counting = marram_repo / "marram" / "counting.py"
    text = counting.read_text()
    head, _, rest = text.partition("\n\n\n")
    counting.write_text(head + "\n\n\n# A comment block and a helper\n# that push every finding down.\n"
                        "def unrelated(a):\n    return a\n\n\n" + rest)
    moved = cli_json(capsys, "check", "marram", "--format", "json")
    shifted = {(p, ln + 6 if p.endswith("counting.py") else ln) for p, ln in locations(
        {"findings": total})}
    assert locations(moved) == shifted  # every finding of counting.py moved down by the six new lines
    assert cli_json(capsys, "check", "marram", "--format", "json", "--baseline", str(base))["findings"] == []

    counting.write_text(counting.read_text() + NEW_FUNCTION)
    (new,) = cli_json(capsys, "check", "marram", "--format", "json", "--baseline", str(base))["findings"]
    assert new["expression"] == "math.sqrt(m + 2) - math.sqrt(m)"
    # The baseline is read relative to its own folder: the same result from another working directory.
    code, out, _ = cli(capsys, "check", str(marram_repo / "marram"), "--format", "json", "--baseline", str(base))
    assert [f["expression"] for f in json.loads(out)["findings"]] == [new["expression"]]


def test_baseline_counts_equal_expressions(marram_repo: Path, capsys):
    twice = ("import math\n\n\ndef f(x):  # condhint: x in [1e6, 1e15]\n"
             "    a = math.sqrt(x + 1) - math.sqrt(x)\n    print(a)\n"
             "    b = math.sqrt(x + 1) - math.sqrt(x)\n    print(b)\n    return a\n")
    mod = marram_repo / "marram" / "twice.py"
    mod.write_text(twice)
    base = marram_repo / "b.json"
    cli(capsys, "check", "marram/twice.py", "--write-baseline", str(base))
    (entry,) = json.loads(base.read_text())["findings"]
    assert entry["count"] == 2
    mod.write_text(twice.replace("    return a\n", "    c = math.sqrt(x + 1) - math.sqrt(x)\n    print(c)\n"
                                                   "    return a\n"))
    (new,) = cli_json(capsys, "check", "marram/twice.py", "--format", "json", "--baseline", str(base))["findings"]
    assert new["line"] == 9  # the third, new occurrence


def test_bad_baseline_is_a_usage_error(marram_repo: Path, capsys):
    (marram_repo / "x.json").write_text('{"findings": []}')
    code, _, err = cli(capsys, "check", "marram", "--baseline", "x.json")
    assert code == 2 and "not a condhint baseline" in err
    code, _, err = cli(capsys, "check", "marram", "--baseline", "missing.json")
    assert code == 2 and "no such file (create it with --write-baseline)" in err
    (marram_repo / "broken.json").write_text("{not json")
    code, _, err = cli(capsys, "check", "marram", "--baseline", "broken.json")
    assert code == 2 and "cannot read" in err


def test_merge_rejects_missing_and_unreadable_inputs(marram_repo: Path, capsys):
    (marram_repo / "broken.json").write_text("{not json")
    for name, words in (("missing.json", "no such file"), ("broken.json", "cannot read"),
                        ("x.json", "neither condhint JSON nor SARIF")):
        if name == "x.json":
            (marram_repo / name).write_text('{"something": 1}')
        code, _, err = cli(capsys, "merge", name)
        assert code == 2 and words in err, (name, err)


def test_diff_base_in_notebooks_compares_cells(marram_repo: Path, capsys):
    from tests.review.test_notebooks import notebook

    cells = [("code", "import math"),
             ("code", "def a(x):  # condhint: x in [1e6, 1e15]\n    return math.sqrt(x + 1) - math.sqrt(x)"),
             ("code", "def b(t):  # condhint: t in [1e-12, 1e-6]\n    return math.exp(t) - 1")]
    nb = notebook(marram_repo / "lab.ipynb", cells)
    git(marram_repo, "add", "lab.ipynb")
    git(marram_repo, "commit", "-q", "-m", "notebook")
    # Insert a markdown cell on top (every cell number shifts) and edit the finding's line in the last cell.
    changed = [("markdown", "# Notes")] + cells[:2] + [("code", cells[2][1].replace("- 1", "- 1.0"))]
    notebook(nb, changed)
    doc = cli_json(capsys, "check", "lab.ipynb", "--format", "json", "--diff-base", "HEAD")
    assert [(f["cell"], f["line"], f["expression"]) for f in doc["findings"]] == [(4, 2, "math.exp(t) - 1.0")]
