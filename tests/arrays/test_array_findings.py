"""Findings on array code: what must be reported (checked against mpmath, math.fsum and IEEE 754 facts) and
what must stay silent."""
from __future__ import annotations

import math

import numpy as np
import pytest

from condhint.config import Config
from condhint.engine import analyse_module

CFG = Config(kappa_formula=False)


def findings(body: str, cfg: Config = CFG) -> list[tuple[str, str]]:
    text = "import numpy as np\nimport math\n\n" + body
    return [(f.code, f.expression) for f in analyse_module(text, "a.py", cfg, cache=None).report.findings]


def codes(body: str) -> set[str]:
    return {c for c, _ in findings(body)}


def test_one_pass_variance_on_data_with_a_large_mean() -> None:
    # Chan, Golub & LeVeque 1983: mean 1e8, spread 1 -> the one-pass form loses all digits (tests/arrays/
    # test_summation.py measures it with mpmath); condhint flags the subtraction as avoidable.
    body = ("def var(x):\n    # condhint: x in [1e8, 1e8 + 1], len(x) in [100, 1e5]\n"
            "    return np.mean(x * x) - np.mean(x) ** 2\n")
    text = "import numpy as np\n\n" + body.replace("1e8 + 1", "100000001")
    (f,) = analyse_module(text, "a.py", CFG, cache=None).report.findings
    assert (f.code, f.expression) == ("CH101", "np.mean(x * x) - np.mean(x) ** 2")
    assert f.measured_digits_lost is not None and f.measured_digits_lost >= 8
    assert f.kappa is not None and f.kappa < 10 ** (f.measured_digits_lost - 1)  # avoidable, not inherent


@pytest.mark.parametrize("spelling", [
    "np.mean(x**2) - np.mean(x)**2",
    "(x * x).mean() - x.mean() ** 2",
    "np.sum(x * x) / len(x) - (np.sum(x) / x.size) ** 2",
])
def test_raw_moment_variance_in_several_spellings(spelling: str) -> None:
    body = f"def var(x, n: int):\n    # condhint: x in [1e6, 1e7]\n    return {spelling}\n"
    assert "CH101" in codes(body)


def test_raw_moment_covariance() -> None:
    body = ("def cov(x, y):\n    # condhint: x in [1e6, 1e7], y in [1e6, 1e7]\n"
            "    return np.mean(x * y) - np.mean(x) * np.mean(y)\n")
    assert "CH101" in codes(body)


@pytest.mark.parametrize("body", [
    "def v(x):\n    # condhint: x in [1e6, 1e7]\n    return np.var(x)\n",
    "def v(x):\n    # condhint: x in [1e6, 1e7]\n    return np.std(x, ddof=1)\n",
    "def v(x):\n    # condhint: x in [1e6, 1e7]\n    return np.mean((x - np.mean(x)) ** 2)\n",
    "def v(x):\n    # condhint: x in [1e6, 1e7]\n    d = x - x.mean()\n    return np.sum(d * d) / (len(x) - 1)\n",
    "def s(z):\n    # condhint: z in [-1000, 1000]\n    e = np.exp(z - np.max(z))\n    return e / e.sum()\n",
    "def t(x):\n    return np.sum(x * x) + np.sum(np.abs(x))\n",
    "def t(x):\n    return np.mean(x) + x.max()\n",
    "def t(k: int):\n    return np.sum(k * k)\n",
    "def t(x):\n    return np.linalg.norm(x)\n",
])
def test_must_not_fire(body: str) -> None:
    assert not {"CH101", "CH301", "CH302"} & codes(body)


def test_softmax_overflows_past_the_exp_threshold() -> None:
    # IEEE 754-2019 binary64: exp(x) overflows for x > ln(1.7976931348623157e308) ≈ 709.78 (numpy agrees).
    with np.errstate(over="ignore"):
        assert math.isfinite(float(np.exp(709.78))) and not math.isfinite(float(np.exp(709.79)))
    tmpl = "def s(z):\n    # condhint: z in [-5, {hi}], len(z) in [1, 1]\n    e = np.exp(z)\n    return e / np.sum(e)\n"
    assert ("CH301", "np.exp(z)") in findings(tmpl.format(hi=710))
    assert not {"CH301", "CH302"} & codes(tmpl.format(hi=709.7))


def test_softmax_whose_sum_overflows() -> None:
    # 256 terms of e^709 sum past the largest binary64 (1.8e308): the sum is inf and every probability 0.
    assert 256 * math.exp(709.0) > 1.7976931348623157e308  # Python floats: the product is inf as well
    body = "def s(z):\n    # condhint: z in [-5, 709], len(z) in [256, 256]\n    e = np.exp(z)\n    return e / np.sum(e)\n"
    assert ("CH301", "np.sum(e)") in findings(body)


def test_log_sum_exp_overflows() -> None:
    body = "def lse(z):\n    # condhint: z in [-10, 800]\n    return np.log(np.sum(np.exp(z)))\n"
    assert ("CH301", "np.exp(z)") in findings(body)


def test_norm_of_large_elements_overflows() -> None:
    # Squares overflow for |x| > sqrt(1.8e308) ≈ 1.34e154 although the norm is ordinary (IEEE 754-2019);
    # numpy's own np.linalg.norm computes sqrt(x·x) (numpy source) and overflows the same way.
    with np.errstate(over="ignore"):
        assert not math.isfinite(float(np.linalg.norm(np.array([1e200, 1e200]))))
    for expr in ("np.sqrt(np.sum(x ** 2))", "np.linalg.norm(x)", "math.sqrt(np.dot(x, x))"):
        body = f"def n(x):\n    # condhint: x in [1, 1e200], len(x) in [2, 50]\n    return {expr}\n"
        assert "CH301" in codes(body), expr


def test_two_reductions_of_one_array_share_its_input() -> None:
    text = "import numpy as np\ndef v(x):\n    return np.mean(x * x) - np.mean(x) ** 2\n"
    ma = analyse_module(text, "a.py", CFG, cache=None)
    (site,) = ma.sites
    assert set(site.arrays) == {"x"}
    from condhint.expr import INPUT, topological
    assert len([n for n in topological(site.root) if n.kind == INPUT]) == 1  # one node for both reductions


def test_sum_whose_terms_cancel_is_inherent_not_avoidable() -> None:
    # κ of a sum is Σ|xᵢ|/|Σxᵢ| (Higham 2002): data that cancel make the problem sensitive; numpy's pairwise
    # sum itself stays within its bound, so this is input sensitivity (declared ranges), never CH101.
    body = "def s(x):\n    # condhint: x in [-1, 1], len(x) in [100, 1000]\n    return np.sum(x)\n"
    assert "CH101" not in codes(body)


def test_axis_and_weights_stay_opaque() -> None:
    text = "import numpy as np\ndef v(x, w):\n    return np.mean(x * x, axis=0) - np.average(x, weights=w) ** 2\n"
    ma = analyse_module(text, "a.py", CFG, cache=None)
    assert all(not s.arrays for s in ma.sites)


def test_matmul_of_declared_vectors_is_a_dot_product() -> None:
    # x @ x + y @ y - 2 * x @ y of near-equal vectors cancels (the expanded square); `@` of undeclared
    # operands may be a matrix product and stays opaque.
    body = ("def d(x, y):\n    # condhint: x in [1e3, 1e4], y in [1e3, 1e4], len(x) in [3, 100], len(y) in [3, 100]\n"
            "    return x @ x + y @ y - 2 * (x @ y)\n")
    assert "CH101" in codes(body)
    text = "import numpy as np\ndef m(a, b):\n    return np.sum(a @ b) - 1.0\n"
    ma = analyse_module(text, "a.py", CFG, cache=None)
    assert all("dot" not in {n.kind for n in __import__("condhint.expr", fromlist=["x"]).topological(s.root)}
               for s in ma.sites)


def test_hover_describes_an_array_subexpression() -> None:
    from condhint import hover
    text = "import numpy as np\ndef v(x):\n    # condhint: x in [1, 2]\n    return np.mean(x * x) - np.mean(x) ** 2\n"
    ma = analyse_module(text, "a.py", CFG, cache=None)
    site, node = ma.node_at(4, 14)  # type: ignore[misc]
    assert node.kind == "mean"
    a = hover.analyse_node(site, node, CFG, cache=None)
    # κ of mean(x²) with respect to the elements is 2 (derivable: Σ 2xᵢ²/n / (Σxᵢ²/n))
    assert a.kappa == pytest.approx(2.0, rel=1e-12)
    assert "mean" in hover.markdown(hover.describe(site, node, a, CFG))


def test_a_file_dense_in_array_code_stays_within_its_budget() -> None:
    # 40 definitions of array statistics (a quarter of them with findings and fixes to search): the file's
    # analysis ends within the default file budget and no expression runs out of its own.
    import time
    parts = ["import numpy as np\n"]
    for i in range(40):
        parts.append(f"def f{i}(x, y):\n    # condhint: x in [{i + 1}e3, {i + 2}e3]\n"
                     f"    a = np.mean(x * x) - np.mean(x) ** 2\n    b = np.sum(x * y) / np.linalg.norm(y)\n"
                     f"    return a + b + np.var(x) + x.std() + np.sqrt(np.sum(y ** 2))\n")
    t0 = time.perf_counter()
    ma = analyse_module("".join(parts), "dense.py", CFG, cache=None)
    seconds = time.perf_counter() - t0
    assert not [f for f in ma.report.findings if f.code == "CH001"]
    assert seconds < CFG.file_budget / 2
    assert len(ma.sites) >= 40


def test_python_level_sums_are_sequential_sums() -> None:
    # sum(x * x for x in xs) / n - m * m is the one-pass variance written in Python (Chan, Golub & LeVeque
    # 1983); Python's sum adds one term after another (its own `sum` evaluates it, row by row).
    body = ("def v(xs):\n    # condhint: xs in [1e6, 1e7]\n    m = sum(xs) / len(xs)\n"
            "    return sum(x * x for x in xs) / len(xs) - m * m\n")
    assert "CH101" in codes(body)
    assert not codes("def s(xs):\n    return sum(xs) / len(xs)\n")  # a sum of positive terms


def test_integer_arrays_are_exact() -> None:
    body = "import numpy.typing as npt\ndef t(k: npt.NDArray[np.int64]):\n    return np.sum(k * k) - np.sum(k) ** 2\n"
    text = "import numpy as np\n" + body
    ma = analyse_module(text, "a.py", CFG, cache=None)
    assert ma.report.findings == [] and all(not s.arrays for s in ma.sites)


def test_explain_declines_array_code_with_a_reason() -> None:
    from condhint.review.explain import NothingThere, explain
    text = "import numpy as np\ndef v(x):\n    return np.mean(x * x) - np.mean(x) ** 2\n"
    with pytest.raises(NothingThere, match="array code"):
        explain(text, "a.py", 3, None, CFG)


def test_the_documented_example_reports_the_one_pass_variance() -> None:
    # docs/configuration.md, section "Arrays": the example must read (literals only) and report what it says.
    from pathlib import Path
    doc = (Path(__file__).resolve().parents[2] / "docs" / "configuration.md").read_text(encoding="utf-8")
    block = doc.split("## Arrays", 1)[1].split("```python\n", 1)[1].split("```", 1)[0]
    (f,) = analyse_module("import numpy as np\n" + block, "doc.py", CFG, cache=None).report.findings
    assert f.code == "CH101" and f.expression == "np.mean(x * x) - np.mean(x) ** 2"


def test_raw_third_moment_is_found_without_a_fix() -> None:
    # E[(x − m)³] from raw moments: mean(x³) − 3m·mean(x²) + 2m³ cancels like the raw variance, more so
    # (Chan, Golub & LeVeque 1983 for the variance; the same expansion). No rule rewrites it: no fix is offered.
    body = ("def third(x):\n    # condhint: x in [1e3, 1e4]\n    m = np.mean(x)\n"
            "    return np.mean(x ** 3) - 3 * m * np.mean(x ** 2) + 2 * m ** 3\n")
    assert "CH101" in codes(body)


def test_array_sites_keep_to_the_expression_budget() -> None:
    text = "import numpy as np\ndef v(x):\n    return np.mean(x * x) - np.mean(x) ** 2\n"
    report = analyse_module(text, "a.py", Config(kappa_formula=False, site_budget=0.0), cache=None).report
    assert [f.code for f in report.findings] == ["CH001"] and "time budget" in report.findings[0].message
