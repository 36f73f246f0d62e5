"""The editor's analysis (unit by unit, reusing unchanged units, tolerant of syntax errors) against the
command line's whole-file analysis: both are `condhint.engine.analyse_module`."""
from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from condhint.config import Config
from condhint.engine import Abandoned, AnalysisCache, UnitCache, analyse_module
from condhint.reading.module_index import read_module
from condhint.reading.source import split_lines
from lsp_samples import GROWTH

DEMO = Path(__file__).resolve().parents[2] / "docs" / "examples" / "marram"
CFG = replace(Config(), kappa_formula=False)
PieceCache = UnitCache


def analyse_document(text, path, cfg, cache, units, abandoned=None):
    """As the language server analyses a document."""
    return analyse_module(text, path, cfg, cache, units=units, tolerant=True, abandoned=abandoned)


def summary(findings):
    return [(f.code, f.span, round(f.digits_lost or 0, 6), f.message, f.related) for f in findings]


@pytest.mark.parametrize("name", sorted(p.name for p in DEMO.glob("*.py")))
def test_same_findings_as_the_whole_file_analysis(name):
    # The reference is the engine's own whole-file analysis (the contract of this module is to agree with it).
    text = (DEMO / name).read_text()
    whole = analyse_module(text, name, CFG, AnalysisCache()).report.findings
    pieces = analyse_document(text, name, CFG, AnalysisCache(), PieceCache()).findings
    assert summary(pieces) == summary(whole)


def test_module_constants_and_globals_reach_every_definition():
    text = ("import math\nG = 9.80665\nscale = 2.0\n\n"
            "def fall(h):\n    # condhint: 1e-9 <= h <= 1e-6\n    return math.sqrt(h + G) - math.sqrt(G)\n\n"
            "def bump():\n    global scale\n    scale = 3.0\n\n"
            "def scaled(x):\n    # condhint: 0.999 <= x <= 1.001, 1.9 <= scale <= 2.1\n    return x * scale - 2.0\n")
    whole = analyse_module(text, "m.py", CFG, AnalysisCache()).report.findings
    pieces = analyse_document(text, "m.py", CFG, AnalysisCache(), PieceCache()).findings
    assert summary(pieces) == summary(whole)
    # G is a constant everywhere; `scale` is rebound through `global`, so in `scaled` it is an input: then
    # x * scale rounds before the subtraction cancels (CH101), while x * 2.0 - 2.0 is exact (Sterbenz) and
    # only sensitive (CH201).
    # (the loss in `scaled` is what κ explains, so its inherent part is reported too: CH201)
    assert [f.code for f in pieces] == ["CH101", "CH101", "CH201"]
    assert set(pieces[0].inputs) == {"h"} and set(pieces[1].inputs) == {"scale", "x"}
    without = analyse_document(text.replace("    global scale\n    scale = 3.0\n", "    pass\n"), "m.py", CFG,
                               AnalysisCache(), PieceCache()).findings
    assert [set(f.inputs) for f in without if f.code == "CH201"] == [{"x"}]


def test_an_edit_reanalyses_one_definition_and_one_expression():
    cache, pieces = AnalysisCache(), PieceCache()
    first = analyse_document(GROWTH, "g.py", CFG, cache, pieces)
    assert first.analysed == len(first.units) == 5 and first.reused == 0
    second = analyse_document(GROWTH.replace("1 + fraction", "1 + 3 * fraction"), "g.py", CFG, cache, pieces)
    assert (second.analysed, second.reused, second.site_misses) == (1, 4, 1)
    # Inserting lines above moves every definition below: their analyses are reused, positions follow.
    moved = analyse_document("# a comment\n\n" + GROWTH, "g.py", CFG, cache, pieces)
    assert moved.site_misses == 0
    assert [(f.code, f.span.line - 2) for f in moved.findings] == [(f.code, f.span.line) for f in first.findings]


def test_syntax_error_in_one_definition_keeps_the_others():
    broken = GROWTH.replace("return math.log(1 + fraction)", "return math.log(1 + fract ion)")
    result = analyse_document(broken, "g.py", CFG, AnalysisCache(), PieceCache())
    assert result.status == "syntax-error"
    errors = [f for f in result.findings if f.code == "CH001"]
    assert len(errors) == 1 and errors[0].span.line == split_lines(broken).index(
        "    return math.log(1 + fract ion)") + 1
    good = analyse_document(GROWTH, "g.py", CFG, AnalysisCache(), PieceCache())
    broken_line = errors[0].span.line
    assert [(f.code, f.span) for f in result.findings if f.code != "CH001"] == \
        [(f.code, f.span) for f in good.findings if f.span.line != broken_line]


def test_unparsable_module_level_code_is_left_out():
    text = GROWTH.replace("from math import exp\n", "from math import exp\nLIMIT = (1 +\n")
    result = analyse_document(text, "g.py", CFG, AnalysisCache(), PieceCache())
    assert [f.code for f in result.findings].count("CH101") == 2
    assert [f.code for f in result.findings].count("CH001") == 1


def test_units_of_a_text_with_and_without_a_syntax_error():
    lines = ["import math", "@decorate", "def f(x,", ") -> float:", "    return x", "# note", "X = 1",
             "class C:", "    pass"]
    index, error = read_module("\n".join(lines))
    assert error is None and index is not None
    # the module-level code (decorators included), then each definition from its `def`/`class` line
    assert [(u.name, u.start, u.end) for u in index.units] == [("<module>", 1, 9), ("f", 3, 5), ("C", 8, 9)]
    lines[4] = "    return x +"
    assert read_module("\n".join(lines))[0] is None  # without tolerance a text that does not parse has no index
    index, error = read_module("\n".join(lines), tolerant=True)
    assert error is not None and error.span.line == 5 and index is not None
    # the broken definition (with its decorator) is left out; the rest is read, line numbers kept
    assert [(u.name, u.start, u.end) for u in index.units] == [("<module>", 1, 9), ("C", 8, 9)]
    assert index.source.lines[6] == "X = 1" and index.source.lines[2] == ""


def test_abandoned_between_definitions():
    calls = []

    def abandoned() -> bool:
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(Abandoned):
        analyse_document(GROWTH, "g.py", CFG, AnalysisCache(), PieceCache(), abandoned=abandoned)
    assert len(calls) == 3


def test_node_at_finds_the_innermost_operation():
    result = analyse_document(GROWTH, "g.py", CFG, AnalysisCache(), PieceCache())
    lines = split_lines(GROWTH)
    line = next(i for i, s in enumerate(lines, 1) if "exp(rate * dt) - 1" in s)
    col = lines[line - 1].index("rate * dt") + 5  # on `*`
    site, node = result.node_at(line, col)
    assert node.text == "rate * dt" and site.root.text == "exp(rate * dt) - 1"
    assert node.span.line == line
    assert result.node_at(1, 3) is None  # the docstring


def test_an_edit_to_a_callee_reanalyses_its_callers():
    # A unit's key holds the definitions it calls: when `helper` changes, `caller` is analysed again (what it
    # computes may depend on it), while the module-level code and `other` are reused.
    text = ("import math\n\ndef helper(x):\n    return x * 2.0\n\n"
            "def caller(y):\n    return math.exp(helper(y)) - 1\n\n"
            "def other(z):\n    return math.sqrt(z + 1.0) - 1.0\n")
    cache, units = AnalysisCache(), UnitCache()
    first = analyse_document(text, "c.py", CFG, cache, units)
    assert (first.analysed, first.reused) == (4, 0)
    second = analyse_document(text.replace("x * 2.0", "x * 3.0"), "c.py", CFG, cache, units)
    assert (second.analysed, second.reused) == (2, 2)
    assert [u.unit.name for u in second.units] == ["<module>", "helper", "caller", "other"]
