"""Array fixes: exact output, where they must not be offered, and accuracy before/after measured against
mpmath and numpy (each rule three ways, as tests/rewrites does for the scalar rules)."""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.fixing import attach_fixes
from condhint.rewrites import apply_fixes

CFG = Config(kappa_formula=False)


def fixed(body: str) -> list[tuple[str, str, list[str], float, float]]:
    text = "import numpy as np\n\n" + body
    ma = analyse_module(text, "a.py", CFG, cache=None)
    attach_fixes(ma, CFG)
    return [(f.code, x.replacement, x.imports, x.measured_digits_lost_before, x.measured_digits_lost_after)
            for f in ma.report.findings for x in f.fixes]


CASES = [
    ("def v(x):\n    # condhint: x in [1e6, 1e7], len(x) in [10, 1000]\n    return np.mean(x * x) - np.mean(x) ** 2\n",
     "np.var(x)", []),
    ("def v(x):\n    # condhint: x in [1e6, 1e7]\n    return np.sum(x ** 2) / len(x) - (np.sum(x) / len(x)) ** 2\n",
     "np.var(x)", []),
    ("def c(x, y):\n    # condhint: x in [1e6, 1e7], y in [1e6, 1e7]\n    return np.mean(x * y) - np.mean(x) * np.mean(y)\n",
     "np.mean((x - np.mean(x)) * (y - np.mean(y)))", []),
    ("def s(z):\n    # condhint: z in [-5, 800]\n    e = np.exp(z)\n    return e / np.sum(e)\n",
     "np.exp(z - np.max(z))", []),
    ("def s(z):\n    # condhint: z in [-5, 800]\n    return np.exp(z) / np.exp(z).sum()\n",
     "np.exp(z - np.max(z)) / np.sum(np.exp(z - np.max(z)))", []),
    ("def l(z):\n    # condhint: z in [-5, 800]\n    return np.log(np.sum(np.exp(z)))\n",
     "np.max(z) + np.log(np.sum(np.exp(z - np.max(z))))", []),
    ("def n(v):\n    # condhint: v in [1, 1e200], len(v) in [2, 100]\n    return np.sqrt(np.sum(v ** 2))\n",
     "math.hypot(*v)", ["import math"]),
    ("def n(v):\n    # condhint: v in [1, 1e200], len(v) in [2, 100]\n    return np.linalg.norm(v)\n",
     "math.hypot(*v)", ["import math"]),
    ("def d(x, y):\n    # condhint: x in [1e3, 1e4], y in [1e3, 1e4]\n"
     "    return np.sum(x * x) + np.sum(y * y) - 2 * np.sum(x * y)\n", "np.sum((x - y) ** 2)", []),
]


@pytest.mark.parametrize("body,replacement,imports", CASES)
def test_rule_output_and_measured_gain(body: str, replacement: str, imports: list[str]) -> None:
    fixes = fixed(body)
    assert fixes, body
    code, text, imps, before, after = fixes[0]
    assert (text, imps) == (replacement, imports)
    assert after <= before - 1.0


@pytest.mark.parametrize("body", [
    # different arrays: not a variance
    "def v(x, y):\n    # condhint: x in [1e6, 1e7], y in [1e6, 1e7]\n    return np.mean(x * x) - np.mean(y) ** 2\n",
    # `e` is also returned: shifting it would change that value
    "def s(z):\n    # condhint: z in [-5, 800]\n    e = np.exp(z)\n    return e / np.sum(e), e\n",
    # no declared length: x may be a matrix, and math.hypot(*x) would raise
    "def n(v):\n    # condhint: v in [1, 1e200]\n    return np.sqrt(np.sum(v ** 2))\n",
    # the argument is a call: repeating it could repeat its effects
    "def l(f, t):\n    # condhint: t in [-5, 800]\n    return np.log(np.sum(np.exp(f(t))))\n",
])
def test_rules_do_not_fire(body: str) -> None:
    assert not [f for f in fixed(body) if f[1] not in ("",)]


def test_fixed_text_parses_and_is_silent() -> None:
    body = CASES[3][0]
    text = "import numpy as np\n\n" + body
    ma = analyse_module(text, "a.py", CFG, cache=None)
    attach_fixes(ma, CFG)
    (f,) = ma.report.findings
    patched = apply_fixes(text, f.fixes[:1])
    assert "e = np.exp(z - np.max(z))" in patched
    assert analyse_module(patched, "a.py", CFG, cache=None).report.findings == []


def test_fixed_forms_against_mpmath() -> None:
    # The written forms, run with numpy/math, against mpmath at 60 digits (references.md: Blanchard, Higham &
    # Higham 2021 for the shifted softmax and log-sum-exp; Chan, Golub & LeVeque 1983 for two-pass variance).
    z = np.array([800.0, 0.0, -5.0, 799.5])
    with mpmath.workdps(60):
        ez = [mpmath.exp(mpmath.mpf(v)) for v in z]
        soft = [float(v / mpmath.fsum(ez)) for v in ez]
        lse = float(mpmath.log(mpmath.fsum(ez)))
    shifted = np.exp(z - np.max(z)) / np.sum(np.exp(z - np.max(z)))
    assert np.allclose(shifted, soft, rtol=1e-15, atol=1e-300)
    assert np.max(z) + np.log(np.sum(np.exp(z - np.max(z)))) == pytest.approx(lse, rel=1e-15)
    with np.errstate(all="ignore"):
        assert np.isnan(np.exp(z) / np.sum(np.exp(z))).any()  # the original form
    v = np.array([1e200, 3e200, 2e200])
    with mpmath.workdps(60):
        exact = float(mpmath.sqrt(mpmath.fsum(mpmath.mpf(t) ** 2 for t in v)))
    assert math.hypot(*v) == pytest.approx(exact, rel=2**-52)
    rng = np.random.default_rng(2)
    x = 1e4 + rng.uniform(0, 1, 100)
    y = x + rng.uniform(-1e-6, 1e-6, 100)
    with mpmath.workdps(60):
        exact = mpmath.fsum((mpmath.mpf(a) - mpmath.mpf(b)) ** 2 for a, b in zip(x, y))
        expanded = np.sum(x * x) + np.sum(y * y) - 2 * np.sum(x * y)
        assert abs(float((mpmath.mpf(float(np.sum((x - y) ** 2))) - exact) / exact)) < 1e-13
        assert abs(float((mpmath.mpf(float(expanded)) - exact) / exact)) > 1e-3
