"""Fixes and κ formulas are computed only for the findings a run writes, and the written output is the same."""
from __future__ import annotations

from condhint.config import Config
from condhint.diskcache import DiskCache
from condhint.kinds import KINDS
from condhint.review.written import Written
from condhint.runner import Target, check_paths, check_target
from tests.review.support import MARRAM, cli_json, without_timings

EVERY_CODE = frozenset(k.code for k in KINDS)


def _by_place(reports) -> dict:
    return {(f.path, f.span, f.code): f for r in reports for f in [*r.findings, *r.suppressed]}


def test_narrowing_first_changes_no_written_finding(capsys):
    everything = without_timings(cli_json(capsys, "check", str(MARRAM), "--format", "json", "-j", "1"))
    codes = sorted({f["code"] for f in everything["findings"]})
    assert len(codes) > 1 and any(f["fixes"] for f in everything["findings"])
    for code in codes:
        narrowed = cli_json(capsys, "check", str(MARRAM), "--format", "json", "-j", "1", "--select", code)
        assert narrowed["findings"] == [f for f in everything["findings"] if f["code"] == code]


def test_findings_not_written_are_neither_searched_nor_given_a_formula():
    full = _by_place(check_paths([str(MARRAM)], Config(), fixes=True).reports)
    fixed_code = next(f.code for f in full.values() if f.fixes)
    only = Written(frozenset({fixed_code}), "info")
    narrowed = _by_place(check_paths([str(MARRAM)], Config(), fixes=True, written=only).reports)
    assert narrowed.keys() == full.keys()  # the run itself still narrows: every finding is reported
    left_out = [k for k, f in full.items() if f.code != fixed_code and (f.fixes or f.kappa_formula)]
    assert left_out
    for k in left_out:
        assert narrowed[k].fixes == [] and narrowed[k].kappa_formula is None
    for k, f in full.items():
        if f.code == fixed_code:
            assert (narrowed[k].fixes, narrowed[k].kappa_formula, narrowed[k].message) == \
                (f.fixes, f.kappa_formula, f.message)


def test_suppressed_findings_keep_their_formula():
    reports = check_paths([str(MARRAM)], Config(), fixes=True, written=Written(EVERY_CODE, "error")).reports
    suppressed = [f for r in reports for f in r.suppressed]
    assert suppressed and all(f.kappa_formula for f in suppressed)


def test_disk_cache_tells_apart_runs_that_write_different_findings(tmp_path):
    cache = DiskCache(tmp_path / "cache")
    target = Target(MARRAM / "budget.py", "budget.py")
    plain = check_target(target, Config(), True)
    fixed = [f.code for f in plain.findings if f.fixes]
    assert fixed
    others = Written(EVERY_CODE - set(fixed), "info")
    narrowed = check_target(target, Config(), True, cache, others)
    assert not any(f.fixes for f in narrowed.findings)
    again = check_target(target, Config(), True, cache, Written(EVERY_CODE, "info"))
    assert cache.hits == 0 and [f.fixes for f in again.findings] == [f.fixes for f in plain.findings]
    assert [f.fixes for f in check_target(target, Config(), True, cache, others).findings] == \
        [f.fixes for f in narrowed.findings] and cache.hits == 1
