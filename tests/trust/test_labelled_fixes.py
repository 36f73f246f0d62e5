"""Fixes condhint offered on real code (sampled with a fixed seed), re-checked with mpmath at the code's plausible
inputs: the fix must equal the original expression (mpmath, 60 digits) and must not be less accurate in binary64.
The snippets and input points are stored in the file, so this is fast and deterministic."""
from __future__ import annotations

import ast
import math
from pathlib import Path

import mpmath
import pytest

from tests.trust import labelled_set as ls
from tests.trust.mp_eval import digits_lost, f64_value, mp_value, variables

# Equal in mpmath: relative difference at 60 digits (inputs are exact binary64 numbers, so only the
# evaluation's own rounding, ~1e-60, separates two equivalent formulas).
SAME = mpmath.mpf(10) ** -40
# The fix may not lose more than this many digits beyond the original at any point.
SLACK = 0.5
# A truncated series (rule "series") may differ from the formula by a quarter ulp at the points.
SERIES = mpmath.mpf(2) ** -55


# The sets: round one (an older tool's fixes, 11 of them wrong, kept as history), the fixes the tool
# offers now on sampled real code, and every fix it offers on the labelled set's real findings.
SETS = {"round1": ls.FIXES, "current": ls.FIXES_CURRENT, "families": ls.FIXES_FAMILIES}


def _records(which: str = "round1") -> list[dict]:
    return ls.load(SETS[which])["records"]


def _all_records() -> list:
    return [pytest.param(r, id=f"{w}:{r['path']}:{r['line']}:{r['rule']}") for w in SETS for r in _records(w)]


def _wrong(which: str) -> list[str]:
    return [f"{r['path']}:{r['line']} `{r['original']}` → `{r['replacement']}`: {why}"
            for r in _records(which) for verdict, why in [judge(r)] if verdict == "wrong"]


def _calls(text: str) -> tuple[set[str], set[str]]:
    """Dotted names of the math/numpy calls in `text`, and the keyword names passed to any call."""
    funcs: set[str] = set()
    keywords: set[str] = set()
    for node in ast.walk(ast.parse(text, mode="eval")):
        if isinstance(node, ast.Call):
            name = ast.unparse(node.func)
            if name.split(".")[0] in ("math", "np", "numpy"):
                funcs.add(name)
            keywords |= {k.arg or "**" for k in node.keywords}
    return funcs, keywords


def _product_orders(text: str, factors: set[str]) -> set[tuple[str, ...]]:
    """Orders in which non-commuting `factors` (source texts) appear in each product of `text`."""
    out: set[tuple[str, ...]] = set()

    def flat(node: ast.AST) -> list[ast.AST]:
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            return flat(node.left) + flat(node.right)
        return [node]

    for node in ast.walk(ast.parse(text, mode="eval")):
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            seq = tuple(t for t in (ast.unparse(n) for n in flat(node)) if t in factors)
            if len(seq) >= 2:
                out.add(seq)
    return out


def structural(rec: dict) -> str | None:
    """Why a fix is wrong without any arithmetic: it drops keyword arguments (`out=`, `where=`), brings binary64
    math calls to values that are not binary64 numbers, or reorders products of non-commuting objects."""
    orig, fix = rec["original"], rec["replacement"]
    (f_orig, k_orig), (f_fix, k_fix) = _calls(orig), _calls(fix)
    if k_orig - k_fix:
        return f"drops the keyword arguments {sorted(k_orig - k_fix)} of the call it replaces"
    if rec.get("value_kind") == "symbolic" and f_fix - f_orig:
        return f"applies {sorted(f_fix - f_orig)} to SymPy objects, which are not binary64 numbers"
    factors = set(rec.get("noncommutative", []))
    if factors and _product_orders(orig, factors) - _product_orders(fix, factors):
        return "reorders products of non-commuting objects " + ", ".join(sorted(factors))
    return None


def _exact(text: str, pt: dict, bind: dict, dps: int = 60) -> mpmath.mpf | None:
    """`text` in mpmath at `pt`, or None where it divides by zero."""
    try:
        return mp_value(text, pt, bind, dps)
    except ZeroDivisionError:
        return None


def _equal(orig: str, fix: str, pt: dict, bind: dict, a: mpmath.mpf, b: mpmath.mpf, tol: mpmath.mpf) -> bool:
    d = abs(a - b)
    if d <= tol * max(abs(a), abs(b)) or d <= mpmath.mpf(10) ** -300:
        return True
    # A difference that shrinks as the working precision grows is the evaluation's own rounding (cos(pi/2) is
    # 1e-61 at 60 digits, not 0); a true difference stays.
    a2, b2 = _exact(orig, pt, bind, 90), _exact(fix, pt, bind, 90)
    return a2 is not None and b2 is not None and abs(a2 - b2) <= d * mpmath.mpf(10) ** -20


def _pairs(rec: dict) -> list[tuple[str, str]]:
    """(original, fix) texts to compare: the span, and the enclosing expression (`context`, the span written
    `{span}`) where what the code does next with the value matters (a division by it)."""
    out = [(rec["original"], rec["replacement"])]
    if rec.get("context"):
        out.append((rec["context"].replace("{span}", f"({rec['original']})"),
                    rec["context"].replace("{span}", f"({rec['replacement']})")))
    return out


def judge(rec: dict) -> tuple[str, str]:
    """('right' | 'wrong', why) for one fix, recomputed from its snippet and points."""
    bind = rec.get("bindings", {})
    why = structural(rec)
    if why is not None:
        return "wrong", why
    # A truncated series is an approximation by construction: it may differ from the formula by a quarter ulp.
    tol = SERIES if rec.get("rule") == "series" else SAME
    worst_orig = worst_fix = 0.0
    for orig, fix in _pairs(rec):
        for pt in rec["points"]:
            fo, ff = f64_value(orig, pt, bind), f64_value(fix, pt, bind)
            if math.isfinite(fo) and not math.isfinite(ff):
                return "wrong", f"`{fix}` is {ff} in binary64 at {pt}, where `{orig}` is finite ({fo:.17g})"
            a, b = _exact(orig, pt, bind), _exact(fix, pt, bind)
            if a == 0 or b == 0:  # log(tanh(150)) = log(1 − 2e−130) is 0 at 60 digits, not at 400
                a, b = _exact(orig, pt, bind, 400), _exact(fix, pt, bind, 400)
            if a is None and b is None:
                continue  # both divide by zero here: same behaviour
            if a is None or b is None:
                return "wrong", f"the {'original' if a is None else 'fix'} divides by zero at {pt}, the other does not"
            if not (mpmath.isfinite(a) and mpmath.isfinite(b)):
                return "wrong", f"non-finite reference at {pt}: {a}, {b}"
            if not _equal(orig, fix, pt, bind, a, b, tol):
                return "wrong", f"not equal at {pt}: original {mpmath.nstr(a, 17)} fix {mpmath.nstr(b, 17)}"
            lo, lf = digits_lost(fo, a), digits_lost(ff, a)
            worst_orig, worst_fix = max(worst_orig, lo), max(worst_fix, lf)
            if lf > lo + SLACK and lf > 1.0:
                return "wrong", f"less accurate at {pt}: fix loses {lf:.1f} digits, original {lo:.1f}"
    return "right", f"equal at {len(rec['points'])} points; worst digits lost {worst_orig:.1f} → {worst_fix:.1f}"


@pytest.mark.parametrize("which", SETS)
def test_the_fixes_file_is_well_formed(which: str) -> None:
    data = ls.load(SETS[which])
    assert isinstance(data["header"]["seed"], int) and data["header"]["readme"].strip()
    recs = data["records"]
    # Issue 12 asks for 50; when condhint offers fewer on the scanned packages, every offered fix is kept.
    assert len(recs) >= min(50, data["header"]["population"]), len(recs)
    for r in recs:
        assert r["verdict"] in ("right", "wrong") and r["plausible"].strip(), r
        assert len(r["points"]) >= 4, r
        texts = [t for pair in _pairs(r) for t in pair]
        names = {v for t in texts for v in variables(t)} - set(r.get("bindings", {}))
        names |= {v for t in r.get("bindings", {}).values() for v in variables(t)} - set(r.get("bindings", {}))
        assert all(set(p) >= names for p in r["points"]), (names, r)


@pytest.mark.parametrize("rec", _all_records())
def test_every_stored_verdict_is_reproduced(rec: dict) -> None:
    # The verdict in the file is what the judge finds from the stored snippet and points, not a typed-in label.
    verdict, why = judge(rec)
    assert verdict == rec["verdict"], why


@pytest.mark.xfail(strict=True, raises=AssertionError, reason="round one is history: the stored fixes are those of "
                   "an older tool, 11 of 65 wrong (docs/robustness.md, 'Labelled real-code set'); the current tool's "
                   "fixes are judged in labelled_fixes_current.json")
def test_zero_wrong_fixes_in_round_one() -> None:
    wrong = _wrong("round1")
    assert not wrong, "\n".join(wrong)


# Issue 12: zero wrong among the fixes the current tool offers (the skyfield series fix, wrong when offered, is
# no longer offered and is listed under `no_longer_offered`, like matplotlib's text.py:774).
def test_zero_wrong_fixes_in_the_current_set() -> None:
    wrong = _wrong("current")
    assert not wrong, "\n".join(wrong)


# Issue 16: every fix the tool offers on the labelled set's real avoidable-loss and overflow findings, judged at
# the code's plausible inputs (every sign and magnitude it allows): none wrong.
def test_zero_wrong_fixes_on_the_labelled_real_findings() -> None:
    wrong = _wrong("families")
    assert not wrong, "\n".join(wrong)


def test_no_wrong_fix_of_round_one_is_offered_on_the_whole_population() -> None:
    # The current file holds every fix the tool offers on the installed packages (those of round one, listed in
    # `complete_packages`; the new packages are sampled), so a round-one wrong fix offered again would be in it.
    data = ls.load(ls.FIXES_CURRENT)
    full = data["header"]["complete_packages"]
    assert sum(1 for r in data["records"] if r["package"] in full) == sum(
        data["header"]["population_by_package"].get(p, 0) for p in full)
    now = {(r["path"], r["replacement"]) for r in data["records"]}
    again = [r for r in _records("round1") if r["verdict"] == "wrong" and (r["path"], r["replacement"]) in now]
    assert not again, again


def test_fixes_no_longer_offered_are_not_in_the_current_set() -> None:
    # Fixes of an earlier scan that the tool no longer offers (matplotlib text.py:774, the division by
    # sin(pi*rotation/180) at rotation = 0) are listed in the header, not judged among the current records.
    data = ls.load(ls.FIXES_CURRENT)
    gone = data["header"]["no_longer_offered"]
    assert gone, "the header lists the dropped fixes"
    now = {(r["path"], r["line"], r["original"], r["replacement"]) for r in data["records"]}
    back = [g for g in gone if (g["path"], g["line"], g["original"], g["replacement"]) in now]
    assert not back, back


@pytest.mark.slow
def test_fixes_no_longer_offered_are_not_offered_on_their_files() -> None:
    gone = [g for g in ls.load(ls.FIXES_CURRENT)["header"]["no_longer_offered"]
            if (ls.site_packages() / g["path"]).exists()]  # packages scanned as downloaded sources are not here
    if not gone:
        pytest.skip("the scanned packages are not installed")
    assert not _offered_again(gone)


def _offered_again(fixes: list[dict]) -> list[str]:
    """Which of these (path, replacement) fixes the current tool offers again on their installed files."""
    from condhint.config import Config
    from condhint.runner import check_paths

    files = sorted({g["path"] for g in fixes})
    found = check_paths([str(ls.site_packages() / f) for f in files], Config(), jobs=2, fixes=True,
                        show_progress=False).findings
    offered = {(str(Path(f.path).resolve().relative_to(ls.site_packages().resolve())), x.replacement)
               for f in found for x in f.fixes}
    return [f"{g['path']}:{g['line']} {g['replacement']}" for g in fixes if (g["path"], g["replacement"]) in offered]


# A 12,000-line module whose check with fixes takes about 100 s; covered by the test above.
SLOW_FILES = {"scipy/stats/_continuous_distns.py"}


@pytest.mark.slow
def test_round_one_wrong_fixes_are_not_offered_on_their_files() -> None:
    recs = [r for r in _records("round1") if r["verdict"] == "wrong" and r["path"] not in SLOW_FILES]
    if not all((ls.site_packages() / r["path"]).exists() for r in recs):
        pytest.skip("the scanned packages are not installed")
    assert not _offered_again(recs)


@pytest.mark.parametrize("rec", [r for r in _records() if r["verdict"] == "wrong" and r.get("repro")],
                         ids=lambda r: f"{r['path']}:{r['line']}:{r['rule']}")
def test_a_wrong_fix_is_no_longer_offered(rec: dict, tmp_path) -> None:
    # The minimal reproduction of each wrong fix, checked with the current tool: it must not offer it again.
    # (Fails on branch `labels` alone, 78cf69c; main at 744af9a no longer offers either fix.)
    from condhint.config import Config
    from condhint.runner import check_paths

    src = tmp_path / "repro.py"
    src.write_text(rec["repro"], encoding="utf-8")
    found = check_paths([str(src)], Config(), jobs=1, fixes=True, show_progress=False).findings
    offered = [x.replacement for f in found for x in f.fixes]
    assert rec["replacement"] not in offered, offered


def test_the_judge_catches_a_wrong_fix() -> None:
    # The judge itself can fail: a sign slip and a less accurate rewrite are both caught.
    pts = [{"x": v} for v in (1e-8, -1e-8, 0.3, -0.3)]
    assert judge({"original": "math.log(1 - x)", "replacement": "math.log1p(x)", "points": pts})[0] == "wrong"
    assert judge({"original": "math.log1p(x)", "replacement": "math.log(1 + x)", "points": pts})[0] == "wrong"
    assert judge({"original": "math.log(1 - x)", "replacement": "math.log1p(-x)", "points": pts})[0] == "right"
    assert judge({"original": "np.log(1 - x, where=x < 1)", "replacement": "np.log1p(-x)", "points": pts})[0] == "wrong"
    ab = {"original": "2*A(1)*B(2) - A(1)*B(2)", "replacement": "B(2)*A(1)", "noncommutative": ["A(1)", "B(2)"],
          "points": [{"A(1)": 2.0, "B(2)": 3.0}] * 4}
    assert judge(ab)[0] == "wrong"
    assert judge({**ab, "replacement": "A(1)*B(2)"})[0] == "right"


def test_the_judge_on_poles_rounding_noise_and_series() -> None:
    # cos(pi/2) is 1e-61 in mpmath at 60 digits and 6e-17 in binary64; sin(0) is 0: equal, and more accurate.
    rot = [{"r": v, "d": 380.0} for v in (0.0, 1e-7, 30.0, 90.0)]
    span = {"original": "math.cos(math.radians(90 - r))", "replacement": "math.sin(math.pi * r / 180)", "points": rot}
    assert judge(span)[0] == "right"
    # ... but divided into, the fix is a division by zero where the original was finite.
    assert judge({**span, "context": "d / {span}"})[0] == "wrong"
    # A truncated series may differ by a quarter ulp, not by a wrong coefficient.
    pts = [{"p": v} for v in (1e-6, 0.01, 0.0999, 0.5)]
    exact = {"original": "p - (1 - p * p) * 0.5 * math.log((1 + p) / (1 - p))", "rule": "series", "points": pts}
    good = "np.where(abs(p) < 0.1, " + " + ".join(f"2 * p ** {2 * k + 1} / {(2 * k - 1) * (2 * k + 1)}"
                                                   for k in range(1, 9)) + ", " + exact["original"] + ")"
    assert judge({**exact, "replacement": good})[0] == "right"
    assert judge({**exact, "replacement": good.replace("/ 15", "/ 16")})[0] == "wrong"
    assert judge({**exact, "replacement": good, "rule": "log1p"})[0] == "wrong"  # exact rules get no allowance
