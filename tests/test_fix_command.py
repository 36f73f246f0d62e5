"""`condhint fix`: diffs, atomic writes in the file's own encoding and line endings, refusal to overwrite a
file changed on disk, idempotence, code selection; and on the demo project, fix → check leaves no fixable
finding while the demo's own tests (against mpmath and numpy) still pass."""
from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from condhint.cli import main
from condhint.commands.fix import FileResult, fix_text, write_back
from condhint.config import Config
from condhint.sourcefile import read_source

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "docs" / "examples"

GROWTH = (
    "from math import exp, log\n"
    "\n"
    "def grown(rate, dt):\n"
    "    # condhint: 1e-6 <= rate <= 1e-3, 1e-6 <= dt <= 1\n"
    "    return exp(rate * dt) - 1\n"
    "\n"
    "def rate(fraction):\n"
    "    # condhint: 1e-12 <= fraction <= 1e-3\n"
    "    return log(1 + fraction)\n"
)
# exp and log are unused once fixed: the fix removes them from the import
FIXED = GROWTH.replace("from math import exp, log\n", "from math import expm1, log1p\n") \
    .replace("exp(rate * dt) - 1", "expm1(rate * dt)").replace("log(1 + fraction)", "log1p(fraction)")


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_diff_shows_the_changes_and_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    Path("m.py").write_text(GROWTH)
    code, out, err = run(capsys, "fix", "--diff", "m.py")
    assert code == 1
    assert out.startswith("--- a/m.py\n+++ b/m.py\n")
    assert "-    return exp(rate * dt) - 1\n+    return expm1(rate * dt)\n" in out
    assert "+from math import expm1, log1p\n" in out
    assert "2 fixes would be applied in 1 file" in err
    assert Path("m.py").read_text() == GROWTH


def test_fix_writes_the_file_and_a_second_run_changes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    Path("m.py").write_text(GROWTH)
    code, out, _ = run(capsys, "fix", "m.py")
    assert code == 0 and "2 fixes applied in 1 file" in out
    assert Path("m.py").read_text() == FIXED
    assert [p.name for p in tmp_path.iterdir()] == ["m.py"]  # no temporary file left behind
    code, out, _ = run(capsys, "fix", "m.py")
    assert code == 0 and "0 fixes applied in 0 files" in out
    assert Path("m.py").read_text() == FIXED


def test_encoding_and_line_endings_are_kept(tmp_path, capsys):
    path = tmp_path / "m.py"
    text = "# -*- coding: latin-1 -*-\n# Température du bassin\n" + GROWTH
    path.write_bytes(text.replace("\n", "\r\n").encode("latin-1"))
    code, _, _ = run(capsys, "fix", str(path))
    assert code == 0
    raw = path.read_bytes()
    assert raw.count(b"\r\n") == raw.count(b"\n") and b"\r\n" in raw
    assert raw.decode("latin-1") == ("# -*- coding: latin-1 -*-\n# Température du bassin\n" + FIXED).replace(
        "\n", "\r\n")


def test_a_byte_order_mark_is_kept(tmp_path, capsys):
    path = tmp_path / "m.py"
    path.write_bytes(b"\xef\xbb\xbf" + GROWTH.encode())
    run(capsys, "fix", str(path))
    assert path.read_bytes() == b"\xef\xbb\xbf" + FIXED.encode()


def test_a_file_changed_on_disk_since_it_was_read_is_not_written(tmp_path, capsys):
    path = tmp_path / "m.py"
    path.write_text(GROWTH)
    src = read_source(path)
    text, applied, _ = fix_text(src.text, "m.py", Config(), {"CH101"}, "info")
    assert applied and text == FIXED
    path.write_text(GROWTH + "\n# edited meanwhile\n")
    assert not write_back(path, FileResult("m.py", src, text, applied))
    assert path.read_text() == GROWTH + "\n# edited meanwhile\n"
    assert "changed on disk" in capsys.readouterr().err


OVERFLOW_AND_FORMULA = (
    "from math import cos, sqrt\n"
    "def dip(tether, theta):  # condhint: 1 <= tether <= 100\n"
    "    assert 0 < theta < 0.01\n"
    "    return tether * (1 - cos(theta))\n"
    "def magnitude(x, y):  # condhint: 1e-200 <= x <= 1e200, 1e-200 <= y <= 1e200\n"
    "    return sqrt(x * x + y * y)\n"
)


def test_select_fixes_only_the_chosen_codes(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    Path("m.py").write_text(OVERFLOW_AND_FORMULA)
    code, out, _ = run(capsys, "fix", "--select", "CH301", "m.py")
    assert code == 0 and "fixed CH301" in out and "CH101" not in out
    text = Path("m.py").read_text()
    assert "hypot(x, y)" in text and "1 - cos(theta)" in text
    code, _, err = run(capsys, "fix", "--select", "CH201", "m.py")
    assert code == 2 and "CH201" in err


def test_min_severity_limits_what_is_fixed(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    src = ("import math\ndef share(a, b):  # condhint: 9.99e5 <= a <= 1.001e6, 9.99e5 <= b <= 1.001e6\n"
           "    return a / b - 1\n") + GROWTH.split("\n", 1)[1].replace("exp(", "math.exp(")
    Path("m.py").write_text(src)
    run(capsys, "fix", "--min-severity", "error", "m.py")
    text = Path("m.py").read_text()
    assert "math.expm1(rate * dt)" in text  # ≈ 12 digits lost: an error
    assert "a / b - 1" in text  # ≈ 5 digits: a warning, left alone


def test_check_json_findings_carry_their_fixes(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    Path("m.py").write_text(GROWTH)
    code, out, _ = run(capsys, "check", "--format", "json", "--jobs", "1", "m.py")
    doc = json.loads(out)
    (first, second) = doc["findings"]
    fix = first["fixes"][0]
    assert {"title", "replacement", "line", "column", "end_line", "end_column", "imports",
            "measured_digits_lost_after"} <= set(fix)
    assert (fix["replacement"], fix["line"], fix["column"], fix["end_column"]) == ("expm1(rate * dt)", 5, 12, 30)
    assert fix["imports"] == ["from math import expm1"] and fix["measured_digits_lost_after"] < 1
    assert second["fixes"][0]["replacement"] == "log1p(fraction)"


@pytest.fixture(scope="module")
def fixed_demo(tmp_path_factory):
    """A copy of docs/examples with `condhint fix` applied to the demo package (run as a subprocess)."""
    copy = tmp_path_factory.mktemp("demo") / "examples"
    shutil.copytree(DEMO, copy, ignore=shutil.ignore_patterns("__pycache__", ".pytest_cache"))
    proc = subprocess.run([sys.executable, "-m", "condhint", "fix", "marram"], cwd=copy, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return copy, proc.stdout


def test_fixing_the_demo_leaves_no_fixable_finding(fixed_demo):
    copy, out = fixed_demo
    assert "13 fixes applied in 5 files" in out, out
    proc = subprocess.run([sys.executable, "-m", "condhint", "check", "--format", "json", "--jobs", "1", "marram"],
                          cwd=copy, capture_output=True, text=True, timeout=300)
    doc = json.loads(proc.stdout)
    assert [f for f in doc["findings"] if f["category"] in ("formula", "overflow", "domain")] == []
    # the finding the lab suppressed on purpose is untouched
    assert "return (1 + rate / 12) ** 12 - 1  # condhint: ignore[CH101]" in (copy / "marram" / "budget.py").read_text()


def test_the_fixed_demo_still_passes_its_own_tests(fixed_demo):
    copy, _ = fixed_demo
    # The demo's tests compare every function with mpmath (50 digits) and numpy's accurate functions.
    proc = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "tests"], cwd=copy,
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stdout[-3000:]
    assert "38 passed" in proc.stdout


def test_fixing_the_demo_again_changes_nothing(fixed_demo):
    copy, _ = fixed_demo
    before = {p: p.read_bytes() for p in (copy / "marram").glob("*.py")}
    proc = subprocess.run([sys.executable, "-m", "condhint", "fix", "marram"], cwd=copy, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0 and "0 fixes applied" in proc.stdout
    assert {p: p.read_bytes() for p in (copy / "marram").glob("*.py")} == before


def test_the_fixed_demo_has_no_import_the_fix_left_unused(fixed_demo):
    # pyflakes (an independent checker) on the fixed files: what the fixes replaced (`cos`, `sqrt`, `log`) is no
    # longer imported; what they need (`hypot`, `log1p`, `expm1`, `import math`) is, in the files' own style.
    import pyflakes.api
    import pyflakes.reporter

    copy, _ = fixed_demo
    import io
    out = io.StringIO()
    for path in sorted((copy / "marram").glob("*.py")):
        pyflakes.api.checkPath(str(path), pyflakes.reporter.Reporter(out, out))
    assert out.getvalue() == ""
    mooring = (copy / "marram" / "mooring.py").read_text()
    assert "from math import sin, hypot\n" in mooring


@pytest.mark.parametrize("before, after, expected", [
    # the fix made `cos` unused: dropped; `sin` still used: kept
    ("from math import cos, sin\nx = cos(1) + sin(1)\n", "from math import cos, sin\nx = 2 + sin(1)\n",
     "from math import sin\nx = 2 + sin(1)\n"),
    # every name unused: the line goes, its comment with it
    ("import numpy as np  # arrays\nx = np.log(2)\n", "import numpy as np  # arrays\nx = 0.69\n", "x = 0.69\n"),
    # unused before the fix already: left alone (not ours to remove)
    ("from math import cos, tan\nx = cos(1)\n", "from math import cos, tan\nx = 1.0\n", "from math import tan\nx = 1.0\n"),
    # a name re-exported by `__all__` stays imported
    ("from math import cos\n__all__ = ['cos']\nx = cos(1)\n", "from math import cos\n__all__ = ['cos']\nx = 0.54\n",
     "from math import cos\n__all__ = ['cos']\nx = 0.54\n"),
    # a line shared with another statement is not rewritten
    ("import math; y = 1\nx = math.log(2)\n", "import math; y = 1\nx = 0.69\n", "import math; y = 1\nx = 0.69\n"),
])
def test_imports_a_fix_made_unused_are_dropped(before, after, expected):
    from condhint.rewrites.apply import drop_unused_imports

    assert drop_unused_imports(before, after) == expected


def test_check_before_the_fix_predicts_what_remains_after_it(fixed_demo):
    # Issue 18: after `fix`, `check` reports only what it already reported as inherent (CH201) before, in the
    # same functions; a loss "avoidable only for exact inputs" carries its inherent part as a CH201 from the start.
    copy, _ = fixed_demo

    def scopes(root: Path) -> set[tuple[str, str, str]]:
        proc = subprocess.run([sys.executable, "-m", "condhint", "check", "--format", "json", "--jobs", "1", "marram"],
                              cwd=root, capture_output=True, text=True, timeout=300)
        return {(Path(f["path"]).name, f["scope"], f["code"]) for f in json.loads(proc.stdout)["findings"]}

    before, after = scopes(DEMO), scopes(copy)
    assert after and {code for _, _, code in after} == {"CH201"}
    assert after <= before, after - before


GENERATED = [  # classic formulas (Goldberg 1991; Higham 2002), each with its declared range
    ("import math\ndef f(x):  # condhint: 1e-12 <= x <= 1e-3\n    return math.exp(x) - 1\n"),
    ("import math\ndef f(x):  # condhint: 1e-12 <= x <= 1e-3\n    return math.log(1 + x)\n"),
    ("import math\ndef f(x):  # condhint: 1e6 <= x <= 1e15\n    return math.sqrt(x + 1) - math.sqrt(x)\n"),
    ("import math\ndef f(x):  # condhint: 1e-8 <= x <= 1e-2\n    return 1 - math.cos(x)\n"),
    ("def f(n):  # condhint: 1e3 <= n <= 1e9\n    return 1.0 / n - 1.0 / (n + 1)\n"),
    ("import math\ndef f(a, b):  # condhint: 1e6 <= a <= 1.001e6, 1e6 <= b <= 1.001e6\n"
     "    return math.log(a) - math.log(b)\n"),
    ("def f(a, b):  # condhint: 9.99e5 <= a <= 1.001e6, 9.99e5 <= b <= 1.001e6\n    return a / b - 1\n"),
]


@pytest.mark.parametrize("src", GENERATED, ids=range(len(GENERATED)))
def test_check_after_fix_reports_only_what_was_reported_as_inherent(src, tmp_path, capsys):
    path = tmp_path / "m.py"
    path.write_text(src)

    def found() -> set[tuple[str, str]]:
        out = tmp_path / "r.json"
        main(["check", str(path), "--format", "json", "--output", str(out), "-j", "1"])
        return {(f["scope"], f["code"]) for f in json.loads(out.read_text())["findings"]}

    before = found()
    assert any(code == "CH101" for _, code in before), before  # each case loses digits as written
    main(["fix", str(path)])
    capsys.readouterr()
    after = found()
    assert {code for _, code in after} <= {"CH201"} and after <= before, (before, after, path.read_text())


def test_fix_and_check_report_the_same_digits(fixed_demo, tmp_path, capsys):
    # The "before" figure `fix` prints is the finding's own, as `check` reported it (issue 18).
    import re

    _, out = fixed_demo
    report = tmp_path / "r.json"
    main(["check", str(DEMO / "marram"), "--format", "json", "--output", str(report), "-j", "1"])
    capsys.readouterr()
    checked = {(Path(f["path"]).name, f["line"], f["code"]): f["digits_lost"]
               for f in json.loads(report.read_text())["findings"]}
    lines = re.findall(r"(\w+\.py):(\d+):\d+: fixed (CH\d+): .*\(digits lost ([\d.]+) →", out)
    assert len(lines) == 13
    for name, line, code, before in lines:
        assert abs(float(before) - checked[(name, int(line), code)]) <= 0.051, (name, line, before)
