"""`condhint explain`: figures checked against mpmath and closed forms, fixes measured, the plot drawn."""
from __future__ import annotations

import json
import math
import struct
from pathlib import Path

import mpmath
import numpy as np
import pytest

from condhint.config import Config
from condhint.findings import Fix
from condhint.review.explain import explain, render
from tests.review.support import MARRAM, cli

SQRT_DIFF = "import math\n\n\ndef step(x):  # condhint: x in [1e6, 1e15]\n    return math.sqrt(x + 1) - math.sqrt(x)\n"
STABLE = "1 / (math.sqrt(x + 1) + math.sqrt(x))"
U = 2.0**-53


def digits_lost_reference(x: float) -> float:
    """binary64 evaluation as Python does it, against mpmath at 60 digits on the same exact input."""
    approx = math.sqrt(x + 1) - math.sqrt(x)
    with mpmath.workdps(60):
        exact = mpmath.sqrt(mpmath.mpf(x) + 1) - mpmath.sqrt(mpmath.mpf(x))
        err = abs((mpmath.mpf(approx) - exact) / exact)
    return math.log10(max(float(err), U) / U)


@pytest.fixture(scope="module")
def explained():
    return explain(SQRT_DIFF, "step.py", 5, None, Config(), fixes=[
        Fix("rationalise the difference", STABLE, span=_span())], curve_points=41)


def _span():
    from condhint.expr import Span

    return Span(5, 11, 5, 42)


def test_table_figures_match_mpmath_and_the_closed_form_kappa(explained):
    e, _ = explained
    p = e.curve
    assert e.swept == "x" and e.finding is not None and e.finding.code == "CH101"
    xs = p.cols["x"]
    assert xs[0] == 1e6 and xs[-1] == 1e15 and len(xs) == 41
    for i in range(0, 41, 5):
        x = float(xs[i])
        assert p.measured[i] == pytest.approx(digits_lost_reference(x), abs=0.01)
        # κ of sqrt(x+1) - sqrt(x) is sqrt(x/(x+1))/2 (derivable: x f'(x)/f(x))
        assert p.kappa[i] == pytest.approx(math.sqrt(x / (x + 1)) / 2, rel=1e-9)
    # The first-order bound u·A (Higham 2002, ch. 2) holds at every point, and the worst case comes near it.
    assert np.all(p.predicted + 0.1 >= p.measured)
    assert np.max(p.predicted) - np.max(p.measured) < 1.0


def test_operations_ranked_by_contribution(explained):
    e, _ = explained
    top = [c.text for c in e.contributions[:3]]
    # At x = 1e15 the two square roots' rounding errors (and that of x + 1) are magnified by ~1/f ≈ 6e7·√x.
    assert set(top) == {"math.sqrt(x + 1)", "math.sqrt(x)", "x + 1"}
    assert e.contributions[0].digits > 14.5


def test_fix_measured_at_the_same_points(explained):
    e, _ = explained
    (c,) = e.candidates
    assert c.profile is not None and c.worst is not None and c.worst < 1.0  # rationalised: accurate
    text = render(e)
    assert "rationalise the difference" in text and "measured here: worst" in text
    assert "κ = " in text  # the symbolic formula (sympy) arrived within its budget


def png_size(path: Path) -> tuple[int, int]:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def test_explain_command_with_try_and_plot(tmp_path: Path, capsys):
    src = tmp_path / "step.py"
    src.write_text(SQRT_DIFF)
    png = tmp_path / "plot.png"
    code = cli(capsys, "explain", f"{src}:5:12", "--try", STABLE, "--plot", str(png), "--format", "json")
    assert code[0] == 0, code[2]
    doc = json.loads(code[1])
    (fix,) = [f for f in doc["fixes"] if f["origin"] == "--try"]
    assert fix["worst_measured"] < 1.0 and doc["finding"]["code"] == "CH101"
    w, h = png_size(png)
    assert 600 <= w <= 2000 and 300 <= h <= 1500 and 10_000 < png.stat().st_size < 1_000_000
    import matplotlib.image

    img = matplotlib.image.imread(str(png))
    colours = {tuple(px) for px in (img[..., :3] * 255).round().astype(int).reshape(-1, 3)[::7]}
    assert len(colours) > 20  # lines, text and axes were drawn
    # Okabe & Ito's colour-blind-safe vermillion for what the code keeps, and the shaded avoidable loss between
    # it and the κ limit (orange at 35% over white).
    vermillion = np.array([0xD5, 0x5E, 0x00]) / 255
    shade = 1 - 0.35 * (1 - np.array([0xE6, 0x9F, 0x00]) / 255)
    for colour in (vermillion, shade):
        assert np.any(np.all(np.abs(img[..., :3] - colour) < 0.03, axis=-1)), colour


def test_explain_errors_are_usage_errors(tmp_path: Path, capsys):
    src = tmp_path / "step.py"
    src.write_text(SQRT_DIFF)
    assert cli(capsys, "explain", f"{src}:2")[0] == 2  # a blank line
    assert cli(capsys, "explain", f"{src}")[0] == 2
    assert cli(capsys, "explain", f"{src}:5", "--try", "1 +")[0] == 2
    assert cli(capsys, "explain", f"{tmp_path}/missing.py:1")[0] == 2


def test_explain_a_demo_finding_with_several_inputs(capsys):
    # budget.py:8 `(1 + rate / n) ** (n * years)` (docs/examples/README.md): n spans the most decades.
    code, out, err = cli(capsys, "explain", f"{MARRAM}/budget.py:8:24", "--points", "16")
    assert code == 0, err
    assert "across the range of n (other inputs at the worst case:" in out
    assert "CH101" in out


def test_explain_names_the_findings_operation_before_the_rounding_it_magnifies(tmp_path: Path, capsys):
    # Issue 18: explain and the finding agree on the operation responsible (the cancelling subtraction of
    # sqrt(x + 1) - sqrt(x), Goldberg 1991); the ranked list is the rounding that operation magnifies.
    src = tmp_path / "step.py"
    src.write_text(SQRT_DIFF)
    code, out, _ = cli(capsys, "explain", f"{src}:5:12")
    assert code == 0
    lines = out.splitlines()
    i = lines.index(next(x for x in lines if x.startswith("where rounding is magnified")))
    assert lines[i + 1].startswith("    the finding's operation: `math.sqrt(x + 1) - math.sqrt(x)`"), lines[i + 1]
