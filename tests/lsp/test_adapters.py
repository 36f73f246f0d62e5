"""The server's small parts without a server: positions, text edits, settings, diagnostics and hover text."""
from __future__ import annotations

from pathlib import Path

import pytest
from lsprotocol import types
from pygls.workspace.position_codec import PositionCodec

from condhint.config import Config
from condhint.findings import Finding, InputInfo
from condhint.expr import Span
from condhint.lsp.convert import Positions, inlay_label, result_id, to_lsp_diagnostic
from condhint.lsp.settings import resolve
from condhint.lsp.textedits import LineFacts, add_clause, apply, comment_line_before, diff

LINE = 'x = "🌊é" + größe(θ)'


@pytest.mark.parametrize("encoding, codec", [("utf-16", "utf-16-le"), ("utf-8", "utf-8")])
def test_positions_both_ways_match_python_codecs(encoding, codec):
    pos = Positions([LINE], PositionCodec(encoding))
    width = 2 if encoding == "utf-16" else 1
    for col in range(len(LINE) + 1):
        p = pos.to_client(1, col)
        # Reference: Python's own encoders.
        assert p == types.Position(line=0, character=len(LINE[:col].encode(codec)) // width)
        assert pos.from_client(p) == (1, col)
    assert pos.from_client(types.Position(line=0, character=10_000)) == (1, len(LINE))


def test_add_clause_extends_starts_or_declines():
    lines = ["def f(x):  # condhint: x > 0", "def g(y):", "def h(z):  # noqa", 's = """', 'text"""']
    facts = LineFacts.of("\n".join(lines))
    e = add_clause(lines, facts, 1, "x < 1")
    assert apply("\n".join(lines), [e]).splitlines()[0] == "def f(x):  # condhint: x > 0, x < 1"
    e = add_clause(lines, facts, 2, "0 < y < 1")
    assert apply("\n".join(lines), [e]).splitlines()[1] == "def g(y):  # condhint: 0 < y < 1"
    assert add_clause(lines, facts, 3, "z > 0") is None  # a second comment on the line would not be read
    assert add_clause(lines, facts, 4, "ignore") is None  # the line ends inside a string
    e = comment_line_before(["def f():", "    return 1"], 2, "ignore")
    assert apply("def f():\n    return 1", [e]) == "def f():\n    # condhint: ignore\n    return 1"


@pytest.mark.parametrize("old, new", [
    ("a\nb\nc\n", "a\nB\nc\n"), ("a\nb", "a\nb\nc"), ("", "x\n"), ("a\nb\n", "b\n"), ("a\r\nb\r\n", "a\r\nc\r\n"),
    ("import math\n\ndef f(x):\n    return x\n", "import math\nfrom math import expm1\n\ndef f(x):\n    return expm1(x)\n"),
])
def test_diff_then_apply_gives_the_new_text(old, new):
    assert apply(old, diff(old, new)) == new


def test_settings_precedence_and_one_message(tmp_path: Path):
    (tmp_path / "pyproject.toml").write_text("[tool.condhint]\nsamples = 64\ndebounce_ms = 5\n")
    s = resolve(tmp_path, {"condhint": {"samples": 128, "inlayHints": True}}, {"samples": 32, "minSeverity": "x"})
    assert (s.config.samples, s.config.debounce_ms, s.inlay_hints) == (32, 5, True)
    assert s.config.min_severity == "info" and s.debounce == 0.005
    assert s.message().count("minSeverity") == 1
    assert not s.analysis_config.kappa_formula and s.config.kappa_formula
    assert resolve(None, {"condhint": []}, []).problems == ()  # empty Lua tables arrive as JSON arrays
    bad = resolve(None, "not an object", None)
    assert bad.config == Config() and "expected an object" in bad.message()


def test_diagnostic_carries_kappa_digits_category_code_and_related_lines():
    f = Finding(path="m.py", span=Span(3, 4, 3, 9), code="CH101", severity="warning", message="`a - b` loses digits",
                category="formula", digits_lost=5.04, predicted_digits_lost=5.5, measured_digits_lost=5.04, kappa=0.5,
                inputs={"a": InputInfo(1, 2, "comment")}, related=[(2, "`a` is computed here")])
    pos = Positions(["", "a = x * y", "    a - b"], PositionCodec("utf-16"))
    d = to_lsp_diagnostic(f, pos, "file:///m.py", related=True)
    assert d.code == "CH101" and d.severity == types.DiagnosticSeverity.Warning and d.source == "condhint"
    assert d.message.startswith("`a - b` loses digits")  # the message leads; the code is the diagnostic's own
    assert "κ ≈ 0.5" in d.message and "5.0 measured, 5.5 predicted" in d.message and "category formula" in d.message
    assert d.related_information[0].location.range.start.line == 1
    assert to_lsp_diagnostic(f, pos, "file:///m.py", related=False).related_information is None
    assert result_id([d]) == result_id([to_lsp_diagnostic(f, pos, "file:///m.py", related=True)])
    assert inlay_label(f) == "−5.0 digits"


@pytest.mark.parametrize("argv", [["serve", "--tcp", "a", "b", "c"], ["serve", "--tcp", "127.0.0.1", "port"],
                                  ["serve", "--tcp", "70000"]])
def test_serve_rejects_bad_tcp_addresses(argv, capsys):
    from condhint.cli import main

    assert main(argv) == 2
    assert "--tcp" in capsys.readouterr().err
