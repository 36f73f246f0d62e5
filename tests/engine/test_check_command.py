"""`condhint check` end to end through `main(argv)`: formats, exit codes, discovery, configuration."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from condhint.cli import main

CANCEL = "import numpy as np\ndef f(x):  # condhint: 1e-12 <= x <= 1e-6\n    return np.exp(x) - 1\n"
STABLE = "import numpy as np\ndef f(x, y):\n    return np.hypot(x, y) * 2.0\n"


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_text_format_and_exit_codes(tmp_path: Path, capsys):
    (tmp_path / "a.py").write_text(CANCEL)
    (tmp_path / "b.py").write_text(STABLE)
    code, out, _ = run(capsys, "check", str(tmp_path / "a.py"))
    assert code == 1
    line = out.splitlines()[0]
    assert line.startswith(f"{tmp_path / 'a.py'}:3:12: error: ") and line.endswith("[CH101]")
    assert run(capsys, "check", str(tmp_path / "b.py"))[0] == 0
    assert run(capsys, "check", str(tmp_path / "missing.py"))[0] == 2
    assert run(capsys, "check", "--format", "nope", str(tmp_path))[0] == 2
    assert run(capsys, "check", "--fail-on", "error", str(tmp_path / "a.py"))[0] == 1


def test_json_document_follows_the_contract(tmp_path: Path, capsys):
    (tmp_path / "a.py").write_text(CANCEL)
    code, out, _ = run(capsys, "check", "--format", "json", str(tmp_path))
    doc = json.loads(out)
    assert doc["version"] == 1 and doc["tool"]["name"] == "condhint"
    (f,) = doc["findings"]
    for key in ("path", "line", "column", "end_line", "end_column", "code", "name", "category", "severity",
                "message", "expression", "digits_lost", "predicted_digits_lost", "measured_digits_lost", "kappa",
                "kappa_formula", "inputs", "worst_at", "fraction_affected", "fixes"):
        assert key in f, key
    assert f["path"] == f"{tmp_path}/a.py"
    assert (f["line"], f["column"], f["end_line"], f["end_column"]) == (3, 12, 3, 25)
    assert f["expression"] == "np.exp(x) - 1" and f["name"] == "avoidable-loss" and f["category"] == "formula"
    assert f["inputs"]["x"]["low"] == pytest.approx(1e-12) and f["inputs"]["x"]["high"] == pytest.approx(1e-6)
    assert "exp" in f["kappa_formula"]
    assert doc["files"] == [{"path": f"{tmp_path}/a.py", "status": "ok", "seconds": doc["files"][0]["seconds"]}]


def test_columns_count_characters_not_bytes(tmp_path: Path, capsys):
    (tmp_path / "u.py").write_text("import numpy as np\ndef f(x):  # condhint: 1e-12 <= x <= 1e-6\n"
                                   "    return 'π😀', np.exp(x) - 1\n", encoding="utf-8")
    doc = json.loads(run(capsys, "check", "--format", "json", str(tmp_path / "u.py"))[1])
    assert doc["findings"][0]["column"] == len("    return 'π😀', ") + 1


def test_directory_walk_skips_hidden_and_virtualenv_folders(tmp_path: Path, capsys):
    for rel in ("pkg/a.py", ".hidden/b.py", "venv/lib/c.py", "env2/d.py", "node_modules/e.py"):
        p = tmp_path / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(CANCEL)
    (tmp_path / "env2" / "pyvenv.cfg").write_text("home = /usr\n")
    doc = json.loads(run(capsys, "check", "--format", "json", str(tmp_path))[1])
    assert [f["path"] for f in doc["files"]] == [f"{tmp_path}/pkg/a.py"]


def test_pyproject_configuration_is_read_and_validated(tmp_path: Path, capsys):
    (tmp_path / "a.py").write_text(CANCEL)
    (tmp_path / "skip_me.py").write_text(CANCEL)
    (tmp_path / "pyproject.toml").write_text(
        '[tool.condhint]\nexclude = ["skip_*.py"]\nthresholds = {info = 2, warning = 10, error = 15}\n'
        'samples = "many"\n')
    code, out, err = run(capsys, "check", "--format", "json", str(tmp_path))
    doc = json.loads(out)
    assert [f["path"] for f in doc["files"]] == [f"{tmp_path}/a.py"]
    assert doc["findings"][0]["severity"] == "warning"  # 12 digits: below the configured error threshold
    assert "samples" in err and "using the default" in err


def test_unreadable_files_give_a_clear_message(tmp_path: Path, capsys):
    (tmp_path / "latin.py").write_bytes(b"x = '\xe9t\xe9'\n")
    (tmp_path / "nul.py").write_bytes(b"x = 1\x00\n")
    (tmp_path / "bom.py").write_bytes(b"\xef\xbb\xbf" + CANCEL.encode())
    doc = json.loads(run(capsys, "check", "--format", "json", str(tmp_path))[1])
    by = {Path(f["path"]).name: f for f in doc["findings"]}
    assert "not valid utf-8" in by["latin.py"]["message"] and by["latin.py"]["code"] == "CH001"
    assert "null bytes" in by["nul.py"]["message"]
    assert by["bom.py"]["code"] == "CH101" and by["bom.py"]["line"] == 3


@pytest.mark.parametrize("fmt, derived", [("text", False), ("markdown", False), ("json", True), ("sarif", True)])
def test_the_kappa_formula_is_derived_only_for_formats_that_show_it(tmp_path: Path, capsys, monkeypatch,
                                                                     fmt, derived):
    # sympy's κ formula is the costliest step on real code; text and Markdown do not show it.
    import condhint.engine as engine

    calls: list[str] = []
    real = engine.kappa_formula
    monkeypatch.setattr(engine, "kappa_formula", lambda site, cfg, root=None, **kw: calls.append(site.root.text)
                        or real(site, cfg, root, **kw))
    (tmp_path / "a.py").write_text(CANCEL)
    code, out, _ = run(capsys, "check", "--format", fmt, str(tmp_path / "a.py"))
    assert code == 1 and "np.exp(x) - 1" in out
    assert bool(calls) == derived
    if fmt == "json":
        assert json.loads(out)["findings"][0]["kappa_formula"]


def test_text_summary_says_what_was_not_analysed(tmp_path: Path, capsys):
    # CH001 is info, hidden by the text default (warnings and up); the summary must not read as all clear.
    (tmp_path / "broken.py").write_text("def f(x:\n    return x\n")
    (tmp_path / "fine.py").write_text(STABLE)
    code, out, _ = run(capsys, "check", str(tmp_path))
    assert code == 0
    assert out.strip().endswith("2 files checked: no findings; 1 part not analysed "
                                "(CH001: syntax, budgets; --min-severity info lists them)")
    code, out, _ = run(capsys, "check", "--min-severity", "info", str(tmp_path))
    assert "[CH001]" in out and "not analysed" not in out.splitlines()[-1]
