"""Messages lead with the facts (issue 18): the first sentence says how many digits are lost out of how many,
avoidable or inherent, and whether a verified fix exists, within one editor line of 100 columns; the detail
follows. One number style everywhere."""
from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import pytest

from condhint.cli import main
from condhint.messages import num, with_fix_note

DEMO = Path(__file__).resolve().parents[2] / "docs" / "examples" / "marram"
HEADS = re.compile(r"^(Loses \d+\.\d of \d+(\.\d)? digits( in \w+)?, (avoidable|avoidable only for exact inputs) "
                   r"\(κ ≈ [^)]+\)|Input errors magnified by κ ≈ \S+ \(\d+\.\d digits at risk\), inherent"
                   r"|Intermediate (overflow to inf|underflow to 0)( in \w+)?: returns [a-z0-9, ]+ for an ordinary "
                   r"result|Rounding leaves the domain.*|Undefined.*|Loses .* steps, .*)(; fix available)?$")


def first_sentence(message: str) -> str:
    return message.split(". ")[0].rstrip(".")


def report(tmp_path: Path, *args: str) -> list[dict]:
    out = tmp_path / "r.json"
    main(["check", *args, "--format", "json", "--min-severity", "info", "--output", str(out)])
    return json.loads(out.read_text())["findings"]


def test_every_demo_message_leads_with_its_facts_within_100_columns(tmp_path: Path) -> None:
    found = [f for f in report(tmp_path, str(DEMO)) if f["code"] != "CH001"]
    assert len(found) >= 10
    for f in found:
        head = first_sentence(f["message"])
        assert len(head) + 1 <= 100, head
        assert HEADS.match(head), head
        assert ("fix available" in head) == bool(f["fixes"]), (head, f["fixes"])
        if head.startswith("Loses "):  # the figure is the finding's own, as JSON gives it
            assert abs(float(head.split()[1]) - f["digits_lost"]) <= 0.051, (head, f["digits_lost"])
        assert not f["message"].startswith("`"), "the expression the user is looking at does not come first"


def test_a_float32_loss_with_a_fix_still_fits_one_line(tmp_path: Path) -> None:
    # log(1 + x) in float32 for x ≈ 1e-6 keeps about 1 of 7.2 digits (Goldberg 1991; numpy's float32 arithmetic
    # in tests/formats): the longest head the avoidable form takes, with the format named and a fix.
    src = tmp_path / "f32.py"
    src.write_text(textwrap.dedent("""\
        import numpy as np
        def f(x):  # condhint: 1e-7 <= x <= 1e-5
            x = np.float32(x)
            return np.log(np.float32(1) + x)
    """))
    (f,) = [f for f in report(tmp_path, str(src)) if f["code"] == "CH101"]
    head = first_sentence(f["message"])
    assert head.startswith("Loses ") and "in float32" in head and len(head) + 1 <= 100, head


def test_the_fix_note_is_added_once_to_the_first_sentence() -> None:
    msg = "Loses 5.0 of 16 digits, avoidable (κ ≈ 1). `a - b` at a ≈ 1: detail. More."
    once = with_fix_note(msg)
    assert once.startswith("Loses 5.0 of 16 digits, avoidable (κ ≈ 1); fix available. `a - b`")
    assert with_fix_note(once) == once


@pytest.mark.parametrize("x, text", [(0.5, "0.5"), (980.0, "980"), (1000.0, "1000"), (1.2e15, "1.2e15"),
                                     (3e-6, "3.0e-6"), (12345.0, "1.2e4"), (float("inf"), "∞")])
def test_one_number_style(x: float, text: str) -> None:
    assert num(x) == text


def test_no_message_of_the_demo_mixes_number_styles(tmp_path: Path) -> None:
    for f in report(tmp_path, str(DEMO)):
        assert not re.search(r"\de[+-]0|\de\+", f["message"]), f["message"]


def test_a_message_names_only_the_inputs_of_the_operation_that_loses(tmp_path: Path) -> None:
    # tether * (1 - cos(theta)): the loss is in 1 - cos(theta) (Goldberg 1991); tether plays no part in it.
    found = report(tmp_path, str(DEMO / "mooring.py"))
    (f,) = [f for f in found if f["expression"] == "1 - cos(theta)"]
    assert "theta ≈" in f["message"] and "tether" not in f["message"], f["message"]
