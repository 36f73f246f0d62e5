"""Which findings of a file a `check` run will write: the costly extras (verified fixes, κ formulas) are
computed for those only. The same narrowing as the run's own (`keep_codes`, the baseline, the changed lines,
the writer's least severity) is applied to a copy of the file's report, in the process that analysed it."""
from __future__ import annotations

import os
from collections import Counter
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from condhint.findings import SEVERITY_RANK, FileReport, Finding

if TYPE_CHECKING:
    from condhint.review.diff_base import ChangedLines


def keep_codes(reports: list[FileReport], codes: set[str]) -> None:
    """Keep, in place, only the findings (and suppressed findings) whose code is in `codes`."""
    for rep in reports:
        rep.findings = [f for f in rep.findings if f.code in codes]
        rep.suppressed = [f for f in rep.suppressed if f.code in codes]


@dataclass(frozen=True)
class Written:
    """What a run writes: findings of `codes` from `min_severity` on, outside the baseline, on changed lines."""

    codes: frozenset[str]
    min_severity: str  # of the findings the writer shows (suppressed ones are all kept: SARIF shows them)
    baseline: Path | None = None
    accepted: Counter[str] | None = None  # the baseline's fingerprints
    changed: "ChangedLines | None" = None

    def among(self, report: FileReport) -> list[Finding]:
        """The findings and suppressed findings of `report` that the run will write."""
        copy = FileReport(path=report.path, status=report.status)
        copy.findings, copy.suppressed = list(report.findings), list(report.suppressed)
        keep_codes([copy], set(self.codes))
        if self.baseline is not None and self.accepted is not None:
            from condhint.review.baseline import keep_new

            # a fingerprint names its file, so counting it down within this file is what the whole run does
            keep_new([copy], self.baseline, Counter(self.accepted))
        if self.changed is not None:
            from condhint.review.diff_base import keep_changed

            keep_changed([copy], self.changed)
        least = SEVERITY_RANK[self.min_severity]
        return [f for f in copy.findings if f.rank >= least] + copy.suppressed

    def key(self, shown: str) -> str:
        """What `among` depends on for the file reported as `shown` (for the disk cache's key)."""
        path = Path(os.path.abspath(shown))
        changed = None if self.changed is None else \
            (path in self.changed.new_files, sorted(self.changed.lines.get(path, ())))
        accepted = None if self.accepted is None else sorted(self.accepted.items())
        return repr((sorted(self.codes), self.min_severity, str(self.baseline), accepted, changed))
