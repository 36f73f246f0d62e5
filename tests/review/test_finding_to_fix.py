"""Issue 18, from finding to fixed: `check --select/--ignore`, `fix PATH:LINE[:COL]`, the text output's mark
of findings with a verified fix, and `explain`'s hint on how to apply the best one. Through `main(argv)`."""
from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from condhint.cli import main
from condhint.kinds import KINDS

# A CH101 error (1 - cos, fixable), a CH301 error (overflow, fixable) and a CH201 warning (no rewrite helps).
THREE = (
    "from math import cos, sqrt\n"
    "\n"
    "\n"
    "def dip(tether, theta):  # condhint: 1 <= tether <= 100\n"
    "    assert 0 < theta < 0.01\n"
    "    return tether * (1 - cos(theta))\n"
    "\n"
    "\n"
    "def magnitude(x, y):  # condhint: 1e-200 <= x <= 1e200, 1e-200 <= y <= 1e200\n"
    "    return sqrt(x * x + y * y)\n"
    "\n"
    "\n"
    "def strain(ratio):\n"
    "    # condhint: 1.00005 <= ratio <= 1.01, ratio +- 0.01%\n"
    "    return (ratio - 1.0) / 2.1\n"
)


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def three(tmp_path: Path) -> Path:
    path = tmp_path / "m.py"
    path.write_text(THREE)
    return path


def _codes_in_text(out: str) -> list[str]:
    return [line.rsplit("[", 1)[1].split("]")[0] for line in out.splitlines() if ": note: " not in line
            and line.startswith("/")]


# ---- --select / --ignore ---------------------------------------------------------------------------------------
def test_select_and_ignore_in_text_with_fail_on(three, capsys):
    code, out, _ = run(capsys, "check", "--select", "CH201", "--fail-on", "error", str(three))
    assert code == 0  # the two errors are not selected: only a warning is left
    assert _codes_in_text(out) == ["CH201"] and out.endswith("1 file checked: 1 warning\n")
    code, out, _ = run(capsys, "check", "--select", "ch201,CH301", "--fail-on", "error", str(three))
    assert code == 1 and sorted(_codes_in_text(out)) == ["CH201", "CH301"]
    code, out, _ = run(capsys, "check", "--ignore", "CH101", "--ignore", "CH301", "--fail-on", "error", str(three))
    assert code == 0 and _codes_in_text(out) == ["CH201"]
    code, out, _ = run(capsys, "check", "--select", "CH101,CH201", "--ignore", "CH201", str(three))
    assert code == 1 and _codes_in_text(out) == ["CH101"]


def test_select_and_ignore_in_json_and_sarif(three, capsys):
    code, out, _ = run(capsys, "check", "--format", "json", "--ignore", "CH101,CH301", "--fail-on", "warning",
                       str(three))
    assert code == 1 and [f["code"] for f in json.loads(out)["findings"]] == ["CH201"]
    code, out, _ = run(capsys, "check", "--format", "sarif", "--select", "CH301", "--fail-on", "warning",
                       str(three))
    results = json.loads(out)["runs"][0]["results"]
    assert code == 1 and [r["ruleId"] for r in results] == ["CH301"]
    code, out, _ = run(capsys, "check", "--format", "sarif", "--select", "CH201", "--fail-on", "error", str(three))
    assert code == 0 and [r["ruleId"] for r in json.loads(out)["runs"][0]["results"]] == ["CH201"]


def test_select_narrows_statistics_and_markdown(three, capsys):
    _, out, _ = run(capsys, "check", "--statistics", "--select", "CH301", str(three))
    table = out.split("\n\n", 1)[1]
    assert "CH301" in table and "CH101" not in table and "CH201" not in table
    _, out, _ = run(capsys, "check", "--format", "markdown", "--ignore", "CH301", str(three))
    assert "CH101" in out and "CH201" in out and "CH301" not in out


def test_unknown_codes_are_a_usage_error_naming_the_known_ones(three, capsys):
    code, out, err = run(capsys, "check", "--select", "CH101,CH999", str(three))
    assert code == 2 and out == "" and "Traceback" not in err
    assert "CH999" in err and all(k.code in err for k in KINDS)
    code, _, err = run(capsys, "check", "--ignore", "nonsense", str(three))
    assert code == 2 and "NONSENSE" in err and "known codes" in err
    code, _, err = run(capsys, "fix", "--ignore", "CH998", str(three))
    assert code == 2 and "CH998" in err and three.read_text() == THREE


def test_fix_ignore_leaves_those_codes(three, capsys):
    code, out, _ = run(capsys, "fix", "--ignore", "CH301", str(three))
    assert code == 0 and "fixed CH101" in out and "CH301" not in out
    text = three.read_text()
    assert "sqrt(x * x + y * y)" in text and "1 - cos(theta)" not in text


# ---- fix PATH:LINE[:COL] ---------------------------------------------------------------------------------------
def _changed_lines(before: str, after: str) -> list[int]:
    a, b = before.splitlines(), after.splitlines()
    assert len(a) == len(b)
    return [i + 1 for i, (x, y) in enumerate(zip(a, b)) if x != y]


def test_fix_at_a_place_changes_only_that_finding(three, capsys):
    code, out, _ = run(capsys, "fix", f"{three}:10:25")
    assert code == 0 and "fixed CH301" in out and "1 fix applied in 1 file" in out
    after = three.read_text()
    assert _changed_lines(THREE, after) == [1, 10]  # the import line and the finding's own line
    assert "hypot(x, y)" in after and "1 - cos(theta)" in after


def test_fix_at_a_place_inside_the_span_and_without_column(three, capsys):
    code, _, _ = run(capsys, "fix", f"{three}:6:26")  # on `cos`, inside `1 - cos(theta)`
    assert code == 0
    assert _changed_lines(THREE, three.read_text()) == [1, 6]
    three.write_text(THREE)
    code, _, _ = run(capsys, "fix", f"{three}:10")
    assert code == 0 and _changed_lines(THREE, three.read_text()) == [1, 10]


def test_fix_at_a_place_with_diff_writes_nothing(three, capsys):
    code, out, err = run(capsys, "fix", "--diff", f"{three}:6:22")
    assert code == 1 and THREE == three.read_text()
    removed = [line for line in out.splitlines() if line.startswith("-") and not line.startswith("---")]
    assert removed == ["-from math import cos, sqrt", "-    return tether * (1 - cos(theta))"]
    assert "1 fix would be applied" in err


def test_fix_at_a_place_with_nothing_fixable(three, tmp_path, capsys):
    code, out, err = run(capsys, "fix", f"{three}:15:13")  # CH201: no rewrite helps
    assert code == 1 and out == "" and "CH201" in err and "unchanged" in err
    code, _, err = run(capsys, "fix", f"{three}:3")  # an empty line
    assert code == 1 and "no finding there" in err
    code, _, err = run(capsys, "fix", "--ignore", "CH301", f"{three}:10:25")
    assert code == 1 and "CH301" in err
    assert three.read_text() == THREE
    erf = tmp_path / "erf.py"
    erf.write_text("import math\n\n\ndef f(x):  # condhint: 1e3 <= x <= 1e4\n"
                   "    return math.erf(x * 1e-3 + 1e-9) - math.erf(x * 1e-3)\n")
    before = erf.read_text()
    code, _, err = run(capsys, "fix", f"{erf}:5")  # a CH101 the rewrite search finds nothing for
    assert code == 1 and "no verified fix was found for the CH101 finding there" in err
    assert erf.read_text() == before


def test_fix_place_usage_errors(three, capsys):
    for argv, says in ((["fix", f"{three}:0"], "start at 1"), (["fix", f"{three.parent}/nope.py:3"], "no such file"),
                       (["fix", f"{three}:6", str(three)], "on its own"),
                       (["fix", f"{three.parent}/n.ipynb:1:2"], ".py")):
        code, _, err = run(capsys, *argv)
        assert code == 2 and says in err and "Traceback" not in err, argv
    assert three.read_text() == THREE


# ---- the text output's mark of findings with a verified fix ----------------------------------------------------
DEMO = Path(__file__).resolve().parents[2] / "docs" / "examples" / "marram"


def _marks_match_json(capsys, target: Path) -> int:
    """Check that `--mark-fixes` tags exactly the findings whose JSON `fixes` is not empty; the count."""
    _, out, _ = run(capsys, "check", "--mark-fixes", "-j", "1", str(target))
    _, doc, _ = run(capsys, "check", "--format", "json", "--min-severity", "warning", "-j", "1", str(target))
    with_fix = {(f["path"], f["line"], f["column"], f["code"]): bool(f["fixes"]) for f in json.loads(doc)["findings"]}
    rows = [line for line in out.splitlines()[:-1] if ": note: " not in line]
    assert len(rows) == len(with_fix)
    for line in rows:
        path, ln, col = line.split(": ", 1)[0].rsplit(":", 2)
        code = re.search(r"\[(CH\d+)\]( \[verified fix\])?$", line).group(1)
        assert line.endswith("] [verified fix]") == with_fix[(path, int(ln), int(col), code)], line
    n = sum(with_fix.values())
    summary = out.splitlines()[-1]
    assert summary.endswith(f"; {n} with a verified fix — run `condhint fix`" if n else "; none with a verified fix")
    return n


def test_mark_is_on_exactly_the_findings_with_fixes(three, capsys):
    assert _marks_match_json(capsys, three) == 2  # CH101 and CH301, not CH201
    assert _marks_match_json(capsys, DEMO) >= 10


def test_without_the_flag_text_output_has_no_mark(three, capsys):
    _, out, _ = run(capsys, "check", str(three))
    assert "verified fix" not in out
    _, out, _ = run(capsys, "check", "--mark-fixes", "--select", "CH201", str(three))
    assert "[verified fix]" not in out and out.endswith("1 warning; none with a verified fix\n")


# ---- explain's hint ---------------------------------------------------------------------------------------------
def test_explain_ends_with_how_to_apply_the_best_fix(three, capsys):
    code, out, _ = run(capsys, "explain", f"{three}:6")
    assert code == 0
    tail = out.rstrip("\n").splitlines()[-3:]
    assert tail[0] == "to apply the best verified fix"
    assert tail[1] == f"    condhint fix {three}:6:22"
    assert tail[2].startswith("    in an editor, the quick fix “Write 1 − cos(x) as 2·sin²(x/2)")
    _, doc, _ = run(capsys, "explain", "--format", "json", f"{three}:6")
    hint = json.loads(doc)["apply"]
    assert hint["command"] == f"condhint fix {three}:6:22" and tail[2].endswith(f"“{hint['quick_fix']}”")
    # the title is the language server's quick fix for the same finding
    from condhint.config import Config
    from condhint.engine import analyse_module
    from condhint.fixing import fixes_for
    from condhint.lsp.actions import fix_plans

    ma = analyse_module(THREE, str(three), Config())
    finding = next(f for f in ma.report.findings if f.span.line == 6)
    assert fix_plans(THREE, finding, fixes_for(finding, ma, Config()))[0].title == hint["quick_fix"]
    # and the command does it: only that finding's line (and the import) change
    code, _, _ = run(capsys, *hint["command"].split()[1:])
    assert code == 0 and _changed_lines(THREE, three.read_text()) == [1, 6]


def test_explain_has_no_hint_without_a_verified_fix(three, capsys):
    _, out, _ = run(capsys, "explain", f"{three}:15")
    assert "condhint fix" not in out and "quick fix" not in out
    _, doc, _ = run(capsys, "explain", "--format", "json", f"{three}:15")
    assert json.loads(doc)["apply"] is None
