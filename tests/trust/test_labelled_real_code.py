"""The labelled real-code set of issue 12: warnings and errors sampled at random (fixed seed) from the installed
sources of large numeric packages, each judged real / range-guess / wrong by reading the code and checking with
mpmath. The re-run part scans the sampled files again and measures precision = real ÷ matched warnings+errors."""
from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest

from condhint.config import Config
from condhint.runner import check_paths
from tests.trust import labelled_set as ls

# Precision measured on this set at default settings when it was labelled (see docs/robustness.md,
# "Labelled real-code set"): real ÷ all sampled warnings and errors.
MEASURED_PRECISION = 0.2713  # 54 real of 199 sampled warnings/errors, measured 2026-12-02 on branch labels (78cf69c)
# Precision over the labelled findings the tool still reports, after the third round's rules (re-scan,
# 2026-12-02, docs/robustness.md §10): 44 real of 91 matched warnings/errors. The guard must not fall under it.
RESCAN_PRECISION = 0.4835
# Issue 12's target.
TARGET_PRECISION = 0.90


def _data() -> dict:
    return ls.load()


def test_the_set_is_well_formed() -> None:
    data = _data()
    header, records = data["header"], data["records"]
    assert isinstance(header["seed"], int), "the sampling seed must be recorded"
    assert header["readme"].strip()
    assert len(records) == header["sample_size"]
    seen: set[tuple] = set()
    for r in records:
        assert r["verdict"] in ls.VERDICTS, r
        assert r["severity"] in ls.SEVERE, r
        assert r["code"] in ("CH101", "CH102", "CH201", "CH301", "CH302"), r
        assert len(r["reason"].strip()) > 20, r
        assert r["package_version"] == header["packages"][r["package"]], r
        assert r["digest"] == ls.digest(r["expression"]), r
        key = (r["path"], r["line"], r["code"], r["digest"])
        assert key not in seen, key
        seen.add(key)
    # The recorded precision is the one the records give, not a typed-in figure.
    real = sum(r["verdict"] == "real" for r in records)
    assert abs(header["precision"] - real / len(records)) < 1e-9
    assert abs(MEASURED_PRECISION - header["precision"]) < 5e-4


def test_the_set_has_the_size_issue_12_asks_for() -> None:
    assert len(_data()["records"]) >= 150


def _rescan() -> tuple[list[dict], dict[int, tuple[str, int, str, str]]]:
    data = _data()
    sp = ls.site_packages()
    records = [r for r in data["records"] if ls.installed_version(r["package"]) == r["package_version"]]
    if len(records) < 0.5 * len(data["records"]):
        pytest.skip("fewer than half of the labelled packages are installed at the labelled versions")
    files = sorted({str(sp / r["path"]) for r in records if (sp / r["path"]).is_file()})
    result = check_paths(files, Config(), jobs=1, show_progress=False)
    found = []
    for f in result.findings:
        if f.severity not in ls.SEVERE:
            continue
        rel = str(Path(f.path).resolve().relative_to(sp.resolve()))
        found.append((rel, f.span.line, f.code, f.expression))
    return records, ls.match_all(records, found)


@pytest.fixture(scope="module")
def rescan() -> tuple[list[dict], dict[int, tuple[str, int, str, str]]]:
    return _rescan()


def _noise_still_reported(records: list[dict], matched: dict) -> str:
    lines = [f"  {r['verdict']:<11} {r['path']}:{r['line']} {r['code']} `{r['expression'][:60]}` — {r['reason']}"
             for i, r in enumerate(records) if i in matched and r["verdict"] != "real"]
    return "\n".join(lines)


@pytest.mark.slow
def test_precision_on_the_labelled_set_does_not_regress(rescan) -> None:
    records, matched = rescan
    verdicts = Counter(records[i]["verdict"] for i in matched)
    n = sum(verdicts.values())
    precision = verdicts["real"] / n if n else 1.0
    assert precision >= RESCAN_PRECISION - 1e-9, (
        f"precision {precision:.3f} over {n} matched warnings/errors fell below {RESCAN_PRECISION:.3f};"
        f" {dict(verdicts)}; labelled noise still reported:\n{_noise_still_reported(records, matched)}")


@pytest.mark.slow
def test_real_findings_are_still_reported(rescan) -> None:
    # Noise reduction must not cost the real findings: at least 90% of those labelled real stay warnings/errors.
    # Losses only at exact zeros of the intended result (class ZERO, e.g. sin at a grid point meant to be π:
    # absolutely negligible, and sensitivity of sin there rather than the formula's doing) may become information.
    records, matched = rescan
    real = [i for i, r in enumerate(records) if r["verdict"] == "real" and r["noise_class"] != "ZERO"]
    lost = [records[i] for i in real if i not in matched]
    assert len(lost) <= 0.1 * len(real), "real findings no longer reported:\n" + "\n".join(
        f"  {r['path']}:{r['line']} {r['code']} `{r['expression'][:60]}`" for r in lost)


@pytest.mark.slow
@pytest.mark.xfail(strict=True, raises=AssertionError,
                   reason="issue 12 target (precision ≥ 90%) not met yet; drop this mark when it is")
def test_precision_meets_the_issue_target(rescan) -> None:
    records, matched = rescan
    verdicts = Counter(records[i]["verdict"] for i in matched)
    n = sum(verdicts.values())
    assert n and verdicts["real"] / n >= TARGET_PRECISION, (
        f"precision {verdicts['real']}/{n}; labelled noise still reported:\n{_noise_still_reported(records, matched)}")
