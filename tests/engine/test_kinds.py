"""The registry of finding kinds is what every output reads (rule lists, names, fixable codes)."""
from __future__ import annotations

from condhint.commands.fix import FIXABLE_CODES
from condhint.config import Config
from condhint.engine import analyse_module
from condhint.kinds import BY_CATEGORY, BY_CODE, KINDS
from condhint.outputs.sarif import rules
from condhint.rewrites import FIXABLE


def test_codes_are_unique_and_every_category_has_one_kind() -> None:
    assert len(BY_CODE) == len(KINDS)
    # the categories the analysis assigns (design §2), "domain-range" being reported as "domain"; "recurrence"
    # is assigned by the measurement of loops (numeric/loops.py)
    assert set(BY_CATEGORY) == {"formula", "inherent", "overflow", "domain", "recurrence"}
    assert all(k.message is not None for k in BY_CATEGORY.values())


def test_outputs_read_the_registry() -> None:
    assert [(r["id"], r["name"], r["fullDescription"]["text"]) for r in rules()] == \
        [(k.code, k.name, k.help) for k in KINDS]
    assert FIXABLE_CODES == sorted(k.code for k in KINDS if k.fixable)
    assert set(FIXABLE) == {k.category for k in KINDS if k.fixable}


def test_severity_rules_of_the_registry_decide_what_is_reported() -> None:
    # exp(x) - 1 near 0 loses about -log10(x) digits (Goldberg 1991): 12 digits at x = 1e-12 is an error,
    # and the same loss on a range covering under 2% of guessed samples is not reported (min_fraction).
    declared = "import math\ndef f(x):  # condhint: 1e-12 <= x <= 1e-11\n    return math.exp(x) - 1\n"
    (f,) = analyse_module(declared, "k.py", Config(kappa_formula=False), cache=None).report.findings
    assert (f.code, f.name, f.severity) == ("CH101", BY_CODE["CH101"].name, "error")
    strict = Config(kappa_formula=False, min_fraction=1.0)
    guessed = "import math\ndef f(x):\n    return math.exp(x) - 1\n"
    assert analyse_module(guessed, "k.py", strict, cache=None).report.findings == []
