"""Calls into the module's own functions are inlined at the call site (issue 15): the cancellation they hide is
found, the caller's ranges reach the callee, the callee's declared ranges still hold."""
from __future__ import annotations

import math

import mpmath
import pytest

from condhint.config import Config
from condhint.engine import AnalysisCache, UnitCache, analyse_module
from condhint.reading.imported import dependency_stamp
from tests.conftest import codes, findings

U = 2.0**-53  # IEEE 754-2019 binary64 unit roundoff

LORENTZ = """
import math
C = 299792458.0

def gamma(beta):
    return 1.0 / math.sqrt(1.0 - beta * beta)

def kinetic(m, v):  # condhint: 1 <= m <= 10, 1 <= v <= 1e3
    beta = v / C
    return m * C**2 * (gamma(beta) - 1.0)
"""


def test_cancellation_behind_a_call_is_found_and_measured():
    (f,) = findings(LORENTZ)
    assert (f.code, f.scope, f.span.line) == ("CH101", "kinetic", 10)
    assert f.expression == "gamma(beta) - 1.0"
    # reference: mpmath at 60 digits of the same binary64 computation's exact value, at the reported worst point
    v, m = f.worst_at["v"], f.worst_at["m"]
    c = 299792458.0
    beta = v / c
    approx = m * c**2 * (1.0 / math.sqrt(1.0 - beta * beta) - 1.0)
    with mpmath.workdps(60):
        # the binary64 quotient v / C: its rounding changes beta²/2 ≈ γ − 1 by 2u relatively, negligible here
        b = mpmath.mpf(beta)
        exact = mpmath.mpf(m) * mpmath.mpf(c) ** 2 * (1 / mpmath.sqrt(1 - b * b) - 1)
        err = abs((mpmath.mpf(approx) - exact) / exact)
    lost = min(math.log10(max(float(err), U) / U), 53 * math.log10(2))
    assert f.measured_digits_lost == pytest.approx(lost, abs=0.3)


def test_without_the_call_the_same_formula_gives_the_same_finding():
    inline = LORENTZ.replace("(gamma(beta) - 1.0)", "(1.0 / math.sqrt(1.0 - beta * beta) - 1.0)")
    (a,) = findings(LORENTZ)
    (b,) = findings(inline)
    assert a.digits_lost == pytest.approx(b.digits_lost, abs=1e-9)


VERSINE = """
import math

def versine(x):
    return 1.0 - math.cos(x)

def half_versine(t):  # condhint: 1e-6 <= t <= 1e-5
    return versine(t) / 2.0
"""


def test_the_finding_sits_in_the_callee_with_the_call_chain():
    (f,) = [f for f in findings(VERSINE) if f.scope == "half_versine"]
    assert f.span.line == 5 and f.expression == "1.0 - math.cos(x)"
    assert f.message.startswith("In `versine` (called at line 8)")
    assert (8, "`versine` is called here and inlined") in f.related
    # 1 − cos t for t ≈ 1e-6 cancels about log10(2/t²) ≈ 12.3 digits (cos t ≈ 1 − t²/2; DLMF ch. 4)
    assert f.inputs["t"].source == "comment" and f.digits_lost > 9


def test_caller_ranges_decide_and_callee_declarations_still_hold():
    # With the caller's range t ∈ [1, 2], 1 − cos t does not cancel: nothing from the caller.
    wide = VERSINE.replace("1e-6 <= t <= 1e-5", "1 <= t <= 2")
    assert [f for f in findings(wide) if f.scope == "half_versine"] == []
    # The callee declares x ≥ 0.5: the caller's call with t ∈ [1e-6, 1] only runs where t ≥ 0.5 (constraint
    # on the caller's input), so the small-t cancellation is not reported for the caller either.
    declared = VERSINE.replace("def versine(x):", "def versine(x):  # condhint: 0.5 <= x <= 2").replace(
        "1e-6 <= t <= 1e-5", "1e-6 <= t <= 1")
    assert findings(declared) == []  # neither the callee (x ≥ 0.5) nor the caller through it
    assert [f.span.line for f in findings(declared.replace("0.5 <= x <= 2", "1e-6 <= x <= 2"))] == [5]


@pytest.mark.parametrize("src", [
    # a stable helper used by a stable caller
    "import math\ndef norm2(a, b):\n    return math.sqrt(a * a + b * b)\n\n"
    "def scaled(x, y):  # condhint: 1 <= x <= 2, 1 <= y <= 2\n    return norm2(x, y) * 2.0\n",
    # a helper with a branch is not inlined (its call stays an opaque input): inlined, it would cancel
    "import math\ndef f(x):\n    if x > 10:\n        return x\n    return 1.0 / math.sqrt(1.0 - x * x)\n\n"
    "def g(t):  # condhint: 1e-9 <= t <= 1e-8\n    return f(t) - 1.0\n",
])
def test_calls_that_must_not_fire(src):
    assert [f.code for f in findings(src) if f.scope in ("scaled", "g")] == []


def test_recursion_and_depth_are_bounded():
    src = ("import math\ndef f(x):\n    return f(x) - 1.0\n\n"
           "def a(x):\n    return b(x)\n\ndef b(x):\n    return a(x) + 1.0\n\ndef g(t):\n    return f(t) + a(t)\n")
    assert codes(src) == []  # read without endless recursion; nothing to report
    deep = ("import math\ndef d0(x):\n    return 1.0 - math.cos(x)\n\ndef d1(x):\n    return d0(x)\n\n"
            "def d2(x):\n    return d1(x)\n\ndef d3(x):\n    return d2(x)\n\ndef d4(x):\n    return d3(x)\n\n"
            "def top(t):  # condhint: 1e-7 <= t <= 1e-6\n    return d4(t) * 2.0\n")
    assert [f for f in findings(deep) if f.scope == "top"] == []  # beyond MAX_DEPTH the call stays opaque
    near = deep.replace("return d4(t) * 2.0", "return d2(t) * 2.0")
    assert [f.span.line for f in findings(near) if f.scope == "top"] == [3]


# ---- functions of other modules of the package ---------------------------------------------------------------
REL = "import math\n\n\ndef versine(x):\n    return 1.0 - math.cos(x)\n"
STABLE = "import math\n\n\ndef versine(x):\n    return 2.0 * math.sin(x / 2.0) ** 2\n"
USE = ("from .rel import versine as vs\nfrom phys.rel import versine\n\n\n"
       "def half(t):  # condhint: 1e-7 <= t <= 1e-5\n    return vs(t) / 2.0\n\n\n"
       "def other(t):  # condhint: 1e-7 <= t <= 1e-5\n    return versine(t) * 3.0\n")


def package(tmp_path, rel: str = REL):
    pkg = tmp_path / "phys"
    pkg.mkdir(exist_ok=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "rel.py").write_text(rel)
    (pkg / "use.py").write_text(USE)
    return pkg / "use.py"


def test_functions_of_the_package_are_read_from_disk_and_inlined(tmp_path):
    use = package(tmp_path)
    ma = analyse_module(USE, str(use), Config(kappa_formula=False), cache=None)
    found = sorted((f.span.line, f.scope) for f in ma.findings)
    assert found == [(6, "half"), (10, "other")]  # relative and absolute imports, shown at the call
    f = next(f for f in ma.findings if f.scope == "half")
    assert f.message.startswith("In `rel.versine` (called at line 6)") and f.expression == "1.0 - math.cos(x)"
    # 1 − cos t for t ≈ 1e-7 cancels ≈ log10(2/t²) ≈ 14.3 digits (DLMF ch. 4); far more than 9 are lost
    assert f.digits_lost > 9
    # without a package (no __init__.py) the absolute import is not the project's: only the relative one is read
    (tmp_path / "phys" / "__init__.py").unlink()
    ma = analyse_module(USE, str(use), Config(kappa_formula=False), cache=None)
    assert sorted(f.scope for f in ma.findings) == ["half"]


def test_caches_follow_the_imported_file(tmp_path):
    use = package(tmp_path)
    cfg = Config(kappa_formula=False)
    units = UnitCache()
    first = analyse_module(USE, str(use), cfg, AnalysisCache(), units=units)
    stamp = dependency_stamp(USE, str(use))
    assert len(first.findings) == 2 and stamp
    (tmp_path / "phys" / "rel.py").write_text(STABLE)  # the callee made stable on disk; the caller unchanged
    assert dependency_stamp(USE, str(use)) != stamp  # part of the unit keys and of the disk cache's key
    second = analyse_module(USE, str(use), cfg, AnalysisCache(), units=units)
    assert second.findings == [] and second.reused == 0


def test_the_disk_cache_misses_when_an_imported_file_changes(tmp_path):
    from types import SimpleNamespace

    from condhint.diskcache import DiskCache
    from condhint.findings import FileReport

    use = package(tmp_path)
    cache = DiskCache(tmp_path / "cache")
    runs: list[str] = []

    def check(target, cfg, fixes):
        runs.append(target.shown)
        return FileReport(target.shown, "ok")

    target = SimpleNamespace(path=use, shown="phys/use.py")
    for _ in range(2):
        cache.check_target(target, Config(), False, check)
    assert len(runs) == 1  # the second run is a hit
    (tmp_path / "phys" / "rel.py").write_text(STABLE)
    cache.check_target(target, Config(), False, check)
    assert len(runs) == 2  # the caller's bytes are unchanged, but a file it inlines from is not


def test_no_rewrite_is_offered_through_an_inlined_call():
    # The same cancellation written in place gets its verified rewrite (expm1, Goldberg 1991); behind a call
    # it does not: the rewrite would edit a function other callers share, judged on this caller's ranges only.
    from condhint.fixing import attach_fixes

    direct = "import math\ndef f(t):  # condhint: 1e-9 <= t <= 1e-6\n    return math.exp(t) - 1.0\n"
    behind = ("import math\ndef g(x):\n    return math.exp(x) - 1.0\n\n"
              "def f(t):  # condhint: 1e-9 <= t <= 1e-6\n    return g(t) * 2.0\n")
    cfg = Config(kappa_formula=False)
    for src, fixed in ((direct, True), (behind, False)):
        ma = analyse_module(src, "t.py", cfg, cache=None)
        attach_fixes(ma, cfg)
        mine = [f for f in ma.findings if f.scope == "f"]
        assert mine and bool(mine[0].fixes) == fixed
