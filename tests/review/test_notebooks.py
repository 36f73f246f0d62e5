"""Notebooks: code cells analysed together, findings located by cell and line within the cell."""
from __future__ import annotations

import json
from pathlib import Path

from tests.review.support import cli, cli_json

CELLS = [
    ("markdown", "# Growth\nSome prose with `exp(x) - 1` in it."),
    ("code", "%matplotlib inline\nimport math\nimport numpy as np"),
    ("code", "!pip list\nRATE = 0.5"),
    ("code", "def grown(x):  # condhint: x in [1e-12, 1e-6]\n    y = 2.0 * x\n    return np.exp(y) - 1\n"),
    ("code", "def broken(:\n    pass"),
    ("code", "%%bash\necho $((1 - 1))"),
    ("code", "%%time\ndef step(n):  # condhint: n in [1e6, 1e15]\n    return math.sqrt(n + 1) - math.sqrt(n)"),
]


def notebook(path: Path, cells=CELLS, language: str = "python") -> Path:
    doc = {"nbformat": 4, "nbformat_minor": 5,
           "metadata": {"kernelspec": {"name": "python3", "language": language},
                        "language_info": {"name": language}},
           "cells": [{"cell_type": kind, "metadata": {}, "source": src.splitlines(keepends=True),
                      **({"outputs": [], "execution_count": None} if kind == "code" else {})}
                     for kind, src in cells]}
    path.write_text(json.dumps(doc, indent=1))
    return path


def test_findings_carry_cell_and_line_within_the_cell(tmp_path: Path, capsys):
    nb = notebook(tmp_path / "growth.ipynb")
    doc = cli_json(capsys, "check", str(nb), "--format", "json", "--min-severity", "info")
    got = {(f["cell"], f["line"], f["code"]) for f in doc["findings"]}
    # Cell numbers count every cell from 1 (markdown too); lines count within the cell.
    assert got == {(4, 3, "CH101"), (5, 1, "CH001"), (7, 3, "CH101")}
    for f in doc["findings"]:
        if f["code"] == "CH101":
            src = CELLS[f["cell"] - 1][1].split("\n")[f["line"] - 1]
            assert src[f["column"] - 1: f["end_column"] - 1] == f["expression"]
    assert doc["files"][0]["status"] == "syntax-error" and doc["files"][0]["path"] == str(nb)


def test_sarif_properties_name_the_cell(tmp_path: Path, capsys):
    nb = notebook(tmp_path / "growth.ipynb")
    doc = cli_json(capsys, "check", str(nb), "--format", "sarif")
    cells = sorted(r["properties"]["cell"] for r in doc["runs"][0]["results"] if r["ruleId"] == "CH101")
    assert cells == [4, 7]
    assert doc["runs"][0]["artifacts"][0]["mimeType"] == "application/x-ipynb+json"


def test_notebooks_in_other_languages_are_not_analysed(tmp_path: Path, capsys):
    nb = notebook(tmp_path / "r.ipynb", [("code", "x <- 1 - cos(t)")], language="R")
    doc = cli_json(capsys, "check", str(nb), "--format", "json")
    assert doc["files"][0]["status"] == "error" and "not Python" in doc["files"][0]["message"]
    (tmp_path / "bad.ipynb").write_text("{not json")
    code, out, _ = cli(capsys, "check", str(tmp_path / "bad.ipynb"), "--format", "json")
    assert json.loads(out)["files"][0]["status"] == "error"


def test_explain_a_notebook_cell(tmp_path: Path, capsys):
    nb = notebook(tmp_path / "growth.ipynb")
    code, out, err = cli(capsys, "explain", f"{nb}:7:3", "--format", "json", "--points", "16")
    assert code == 0, err
    doc = json.loads(out)
    assert (doc["cell"], doc["line"]) == (7, 3) and doc["expression"] == "math.sqrt(n + 1) - math.sqrt(n)"
    assert (doc["finding"]["cell"], doc["finding"]["line"], doc["finding"]["code"]) == (7, 3, "CH101")
    assert cli(capsys, "explain", f"{nb}:3")[0] == 2  # the cell is missing
    assert cli(capsys, "explain", f"{nb}:5:1")[0] == 2  # cell 5 does not parse
