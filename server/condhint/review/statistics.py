"""`--statistics`: findings counted by code, with severities, worst loss, files and suppressions."""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

from condhint.findings import SEVERITY_RANK, FileReport
from condhint.kinds import BY_CODE


@dataclass
class CodeStats:
    code: str
    by_severity: dict[str, int] = field(default_factory=lambda: {"error": 0, "warning": 0, "info": 0})
    suppressed: int = 0
    worst: float | None = None  # most digits lost (or at risk)
    files: set[str] = field(default_factory=set)

    @property
    def total(self) -> int:
        return sum(self.by_severity.values())

    @property
    def name(self) -> str:
        return BY_CODE[self.code].name


def by_code(reports: list[FileReport], min_severity: str = "info") -> list[CodeStats]:
    """Statistics of the findings at or above `min_severity`, most frequent code first."""
    minimum = SEVERITY_RANK[min_severity]
    stats: dict[str, CodeStats] = defaultdict(lambda: CodeStats(""))
    for rep in reports:
        for f in rep.findings:
            if f.rank < minimum:
                continue
            s = stats[f.code]
            s.code = f.code
            s.by_severity[f.severity] += 1
            s.files.add(rep.path)
            if f.digits_lost is not None and (s.worst is None or f.digits_lost > s.worst):
                s.worst = f.digits_lost
        for f in rep.suppressed:
            s = stats[f.code]
            s.code = f.code
            s.suppressed += 1
    return sorted(stats.values(), key=lambda s: (-s.total, s.code))


def table(reports: list[FileReport], min_severity: str = "info") -> str:
    """A plain-text table for the terminal."""
    rows = by_code(reports, min_severity)
    if not rows:
        return "no findings to count\n"
    head = f"{'code':<6} {'name':<18} {'total':>5} {'error':>5} {'warn':>5} {'info':>5} {'supp':>5} " \
           f"{'files':>5} {'worst':>6}"
    lines = [head, "-" * len(head)]
    for s in rows:
        worst = "" if s.worst is None else f"{s.worst:.1f}"
        lines.append(f"{s.code:<6} {s.name:<18} {s.total:>5} {s.by_severity['error']:>5} "
                     f"{s.by_severity['warning']:>5} {s.by_severity['info']:>5} {s.suppressed:>5} "
                     f"{len(s.files):>5} {worst:>6}")
    total = sum(s.total for s in rows)
    supp = sum(s.suppressed for s in rows)
    lines.append(f"{'all':<6} {'':<18} {total:>5} {'':>5} {'':>5} {'':>5} {supp:>5}")
    lines.append("worst = most digits lost (or at risk) by one finding of that code")
    return "\n".join(lines) + "\n"
