"""Pathological inputs finish quickly: a CH001 finding for the part that cannot be analysed (or no finding),
and the rest of the file analysed as usual (the marker formula at the end is still reported).

Time bounds are generous multiples of the per-site budget (cfg.site_budget = 2 s) for a shared 2-core machine.
"""
from __future__ import annotations

import ast
import math
import re
import sys
import time
from pathlib import Path

import pytest

from condhint.config import Config
from condhint.engine import analyse_module, check_source
from condhint.expr import topological

from tests.robustness.support import MARKER, MARKER_EXPR, check_json, codes_at, marker_line, marker_loss_digits, write

BOUND = 15.0  # seconds for one pathological file, all included


def test_marker_really_loses_digits() -> None:
    # The marker is a true positive: sqrt(n+1) - sqrt(n) cancels for large n (Goldberg 1991; checked here
    # against mpmath at 50 digits), so every test below may expect CH101 on it.
    assert marker_loss_digits() >= 4


def _check_file(tmp_path: Path, text: str, name: str = "patho.py") -> tuple[dict, float]:
    doc, rc, seconds = check_json(write(tmp_path, name, text))
    assert rc in (0, 1), rc
    return doc, seconds


def _rest_analysed(doc: dict, text: str) -> None:
    assert "CH101" in codes_at(doc, marker_line(text)), doc["findings"]


@pytest.mark.parametrize("expr", ["10**10**10", "2.0**99999", "10**10**10 * x + 1.5", "2.0**99999 * x - x",
                                  "x**(2**x)"])
def test_huge_powers(tmp_path: Path, expr: str) -> None:
    text = f"def f(x):\n    return {expr}\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert set(codes_at(doc, 2)) <= {"CH001", "CH301"}, doc["findings"]
    _rest_analysed(doc, text)


def test_powers_beyond_every_binary_format_saturate_in_the_reference() -> None:
    # x ** 2**20 took seconds in mpmath (it is computed exactly first); beyond 2**16384 no binary format
    # (binary128 included, IEEE 754-2008) holds the value, so the reference is ±inf or ±0 there.
    from mpmath import inf, isnan, mpf

    from condhint.numeric.operations import _mp_pow

    t0 = time.perf_counter()
    assert _mp_pow(mpf(3), mpf(2) ** 20) == inf
    assert time.perf_counter() - t0 < 0.1
    assert _mp_pow(mpf(-2), mpf(20001)) == -inf and _mp_pow(mpf(-2), mpf(20000)) == inf
    assert _mp_pow(mpf(0.5), mpf(20000)) == 0 and _mp_pow(mpf(2), mpf(-20000)) == 0
    assert isnan(_mp_pow(mpf(-2), mpf(20000.5)))
    for a, b in ((mpf("1.0001"), mpf(1e5)), (mpf(2), mpf(16000)), (mpf(-3), mpf(7)), (mpf(10), mpf(-300))):
        assert _mp_pow(a, b) == a ** b  # inside the range: mpmath's own power


def test_nested_5000_parentheses_is_a_syntax_error_python_also_refuses(tmp_path: Path) -> None:
    body = "(" * 5000 + "x" + " + 1.5)" * 5000
    with pytest.raises((SyntaxError, MemoryError, RecursionError)):  # CPython's own parser refuses it
        ast.parse(body)
    text = f"def f(x):\n    return {body}\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert [f["code"] for f in doc["findings"]] == ["CH001"]
    assert doc["files"][0]["status"] == "syntax-error"


@pytest.mark.parametrize("shape", ["power", "unary"])
def test_nested_5000_operators(tmp_path: Path, shape: str) -> None:
    body = " ** ".join(["x"] * 5000) if shape == "power" else "- " * 5000 + "x * 1.5"
    text = f"def f(x):\n    return {body}\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    try:
        ast.parse(text)
    except (SyntaxError, MemoryError, RecursionError):
        # Python cannot read the file either: one clear file-level CH001.
        assert [f["code"] for f in doc["findings"]] == ["CH001"]
        assert "nested too deeply" in doc["findings"][0]["message"]
        return
    assert set(codes_at(doc, 2)) <= {"CH001"}
    _rest_analysed(doc, text)


def test_deep_expression_python_can_parse(tmp_path: Path) -> None:
    # 2,500 terms parse in CPython 3.11 but nest deeper than a Python-level recursion can follow.
    body = " + ".join(f"x * {i}.5" for i in range(2500))
    text = f"def f(x):\n    return {body}\n" + MARKER
    ast.parse(text)
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert set(codes_at(doc, 2)) <= {"CH001"}
    _rest_analysed(doc, text)


def test_sum_of_100000_terms_in_one_expression(tmp_path: Path) -> None:
    body = " + ".join(f"x * {i}.5" for i in range(100_000))
    text = f"def f(x):\n    return {body}\n" + MARKER
    with pytest.raises(RecursionError):  # CPython cannot compile it either
        compile(text, "patho.py", "exec")
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert [f["code"] for f in doc["findings"]] == ["CH001"]
    assert "nested too deeply" in doc["findings"][0]["message"]


def test_long_sum_over_many_statements(tmp_path: Path) -> None:
    # A long sum as Python allows it: accumulating statements of 100 terms each. 100 statements (10,000 terms)
    # here; 1,000 statements (100,000 terms) take minutes, see docs/robustness.md.
    lines = ["def f(x):", "    s = 0.0"]
    lines += ["    s += " + " + ".join(f"x * {k}.5" for k in range(i * 100, i * 100 + 100)) for i in range(100)]
    text = "\n".join(lines) + "\n    return s\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < 60, seconds
    _rest_analysed(doc, text)


def test_file_budget_bounds_a_long_file_and_says_what_was_left(tmp_path: Path) -> None:
    # 300 accumulating statements of 100 terms, a few hundredths of a second each, under a 1 s file budget.
    write(tmp_path, "pyproject.toml", "[tool.condhint]\nfile_budget = 1.0\n")
    lines = ["def f(x):", "    s = 0.0"]
    lines += ["    s += " + " + ".join(f"x * {k}.25" for k in range(i * 100, i * 100 + 100)) for i in range(300)]
    text = "\n".join(lines) + "\n    return s\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < 1.0 + 2 * Config().site_budget + 10, seconds
    left = [f for f in doc["findings"] if "file exceeded its time budget of 1 s" in f["message"]]
    assert len(left) == 1, doc["findings"]
    count = int(re.search(r"; (\d+) expressions? from line (\d+) on", left[0]["message"]).group(1))
    assert 0 < count <= 300  # some statements were analysed (past the budget only cached analyses are used,
    assert left[0]["code"] == "CH001" and "raise `file_budget`" in left[0]["message"]  # e.g. the marker's)


def test_file_budget_accepts_inf_and_rejects_negatives() -> None:
    from condhint.config import apply_settings

    cfg, errors = apply_settings(Config(), {"file_budget": math.inf})
    assert cfg.file_budget == math.inf and not errors
    cfg, errors = apply_settings(Config(), {"file_budget": -1})
    assert cfg.file_budget == Config().file_budget and errors and "file_budget" in errors[0]


def _demo_copies(lines: int) -> str:
    """Real numeric code at scale: the demo modules repeated with renamed functions."""
    demo = Path(__file__).resolve().parents[2] / "docs" / "examples" / "marram"
    base = "\n".join((demo / n).read_text(encoding="utf-8") for n in sorted(p.name for p in demo.glob("*.py"))
                     if n != "__init__.py")
    out, i = [], 0
    while sum(c.count("\n") for c in out) < lines:
        out.append(base.replace("def ", f"def c{i}_"))
        i += 1
    return "\n".join(out)


def test_50000_line_file(tmp_path: Path) -> None:
    small, big = _demo_copies(1_000), _demo_copies(50_000)
    assert big.count("\n") >= 50_000
    t0 = time.perf_counter()
    one = check_source(small, "small.py", Config())
    t_small = time.perf_counter() - t0
    # Fix search is measured separately (docs/robustness.md): here the analysis itself, as `check` runs it.
    write(tmp_path, "pyproject.toml", "[tool.condhint]\nfixes = false\n")
    doc, seconds = _check_file(tmp_path, big, "big.py")
    assert seconds < 120, seconds
    # Every copy of the demo gets the same findings as the first one: nothing is dropped at scale.
    copies_small = small.count("def c") // max(small.count("def c0_"), 1)
    copies_big = big.count("def c") // max(big.count("def c0_"), 1)
    per_copy = len([f for f in one.findings if f.code != "CH001"]) / copies_small
    assert len([f for f in doc["findings"] if f["code"] != "CH001"]) == per_copy * copies_big
    assert seconds < 4 * t_small * copies_big / copies_small + 10, (seconds, t_small)  # about linear


def _chain(levels: int) -> str:
    body = ["    a0 = x + y"] + [f"    a{i} = a{i - 1} * a{i - 1}" for i in range(1, levels)]
    return "def f(x, y):\n" + "\n".join(body) + f"\n    return a{levels - 1}\n" + MARKER


def test_reassignment_chain_is_linear() -> None:
    sizes, times = {}, {}
    for levels in (10, 20, 30):
        text = _chain(levels)
        t0 = time.perf_counter()
        mod = analyse_module(text, "chain.py", Config(), cache=None)
        times[levels] = time.perf_counter() - t0
        sizes[levels] = sum(len(topological(s.root)) for s in mod.sites)
        assert any(f.code == "CH101" and f.span.line == marker_line(text) for f in mod.report.findings)
    # The inlined formula is a DAG: its size grows by the same amount per 10 levels (never doubling).
    assert sizes[30] - sizes[20] == sizes[20] - sizes[10]
    assert times[30] < 3 * times[10] + 3.0, times


@pytest.mark.parametrize("depth", [150, 1000])
def test_nested_lambdas(tmp_path: Path, depth: int) -> None:
    text = "f = " + "lambda x: " * depth + "x * 1.5 - 1.0\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert set(codes_at(doc, 1)) <= {"CH001"}
    _rest_analysed(doc, text)


def test_nested_lambdas_each_analysed_once() -> None:
    # 20 levels was ~2**20 walks before the walker scanned each lambda once.
    text = "f = " + "".join(f"lambda x{i}: " for i in range(20)) + " - ".join(f"x{i} * 0.1" for i in range(20))
    t0 = time.perf_counter()
    rep = check_source(text + "\n" + MARKER, "lam.py", Config())
    assert time.perf_counter() - t0 < BOUND
    assert rep.status == "ok"


@pytest.mark.parametrize("depth", [20, 150])
def test_nested_comprehensions(tmp_path: Path, depth: int) -> None:
    e = "x * 0.1 - 1.0"
    for _ in range(depth):
        e = f"[{e} for x in xs]"
    text = f"def f(xs):\n    return {e}\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    assert set(codes_at(doc, 2)) <= {"CH001", "CH101"}
    _rest_analysed(doc, text)


def test_deeply_nested_blocks(tmp_path: Path) -> None:
    text = "def f(x):\n" + "".join("    " * (i + 1) + f"if x > {i}:\n" for i in range(90)) + \
        "    " * 91 + "return x - 1.0\n" + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    _rest_analysed(doc, text)


def test_slow_reference_hits_the_budget_not_a_hang(tmp_path: Path) -> None:
    # Each of these took minutes in mpmath (argument reduction of huge values, exponents of exponents)
    # before the budget was honoured within mpmath passes.
    exprs = ["math.exp(math.exp(math.exp(x))) - 1.0", "math.cos(x ** 1e10) - 1.0",
             "np.sin(np.exp(x * 700.0)) - x", "(1.0 + x) ** 1e300 - 1.0", "x ** 1e300 * 2.5 - x"]
    text = "import numpy as np\n" + "".join(f"def f{i}(x):\n    return {e}\n" for i, e in enumerate(exprs)) + MARKER
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < len(exprs) * 2 * Config().site_budget + 10, seconds
    for f in doc["findings"]:
        if f["code"] == "CH001":
            assert "budget" in f["message"] or "not analysed" in f["message"]
    _rest_analysed(doc, text)


def test_budget_exceeded_is_reported_for_that_site_only(tmp_path: Path) -> None:
    write(tmp_path, "pyproject.toml", "[tool.condhint]\nsite_budget = 0.0\n")
    big = " + ".join(f"math.sin(x * {i}.5)" for i in range(200))  # large enough to reach a budget check
    text = f"import math\n\n\ndef slow(x):\n    return {big}\n\n\ndef quick(x):\n    return x * 2.0\n"
    doc, seconds = _check_file(tmp_path, text)
    assert seconds < BOUND
    ch001 = [f for f in doc["findings"] if f["code"] == "CH001"]
    assert ch001 and all(f["line"] == 5 and "budget" in f["message"] for f in ch001), doc["findings"]


def test_unicode_identifiers(tmp_path: Path) -> None:
    text = "import math\n\n\ndef f(ωμέγα):\n    return math.sqrt(ωμέγα + 1) - math.sqrt(ωμέγα)\n" + MARKER
    doc, _ = _check_file(tmp_path, text)
    hit = [f for f in doc["findings"] if f["line"] == 5 and f["code"] == "CH101"]
    assert hit, doc["findings"]
    line = text.splitlines()[4]
    # JSON columns are 1-based characters (design §4), so non-ASCII names do not shift them.
    assert hit[0]["column"] == line.index("math.sqrt") + 1
    assert hit[0]["end_column"] == len(line) + 1
    assert hit[0]["expression"] == "math.sqrt(ωμέγα + 1) - math.sqrt(ωμέγα)"


def _positions(doc: dict) -> list[tuple]:
    return sorted((f["line"], f["column"], f["end_line"], f["end_column"], f["code"]) for f in doc["findings"])


def _demo_module() -> str:
    return (Path(__file__).resolve().parents[2] / "docs/examples/marram/counting.py").read_text(encoding="utf-8")


def test_crlf_tabs_and_bom_give_the_same_findings(tmp_path: Path) -> None:
    text = _demo_module()
    ref, _ = _check_file(tmp_path, text, "lf.py")
    assert ref["findings"]
    crlf, _ = _check_file(tmp_path, text.replace("\n", "\r\n"), "crlf.py")
    assert _positions(crlf) == _positions(ref)
    bom, rc, _ = check_json(write(tmp_path, "bom.py", b"\xef\xbb\xbf" + text.encode("utf-8")))
    assert _positions(bom) == _positions(ref)
    tabbed = "\n".join("\t" * ((len(ln) - len(ln.lstrip(" "))) // 4) + ln.lstrip(" ") for ln in text.split("\n"))
    ast.parse(tabbed)
    tabs, _ = _check_file(tmp_path, tabbed, "tabs.py")
    # Each indentation level is one character instead of four: lines agree, columns move with the indent.
    assert [p[0::2] for p in _positions(tabs)] == [p[0::2] for p in _positions(ref)]
    for t, r in zip(_positions(tabs), _positions(ref)):
        line = text.split("\n")[r[0] - 1]
        indent = len(line) - len(line.lstrip(" "))
        assert r[1] - t[1] == indent - indent // 4


def test_null_bytes(tmp_path: Path) -> None:
    p = write(tmp_path, "nul.py", b"def f(x):\n    return x - 1.0\x00\n")
    doc, rc, seconds = check_json(p)
    assert seconds < BOUND and rc in (0, 1)
    assert [f["code"] for f in doc["findings"]] == ["CH001"]
    assert "null" in doc["findings"][0]["message"]


def test_non_utf8_file_has_a_clear_message(tmp_path: Path) -> None:
    p = write(tmp_path, "latin.py", "# Grüße\ndef f(x):\n    return x - 1.0\n".encode("latin-1"))
    doc, rc, _ = check_json(p)
    assert rc in (0, 1)
    [f] = doc["findings"]
    assert f["code"] == "CH001" and "utf-8" in f["message"].lower() and "coding" in f["message"]


def test_declared_latin1_file_is_read(tmp_path: Path) -> None:
    text = "# -*- coding: latin-1 -*-\n# Grüße\n" + _demo_module()
    doc, _, _ = check_json(write(tmp_path, "latin_ok.py", text.encode("latin-1")))
    assert any(f["code"] == "CH101" for f in doc["findings"])


def test_recursion_limit_is_left_as_found() -> None:
    before = sys.getrecursionlimit()
    check_source("x = " + " + ".join(["y * 0.5"] * 2500) + "\n", "deep.py", Config())
    assert sys.getrecursionlimit() == before
