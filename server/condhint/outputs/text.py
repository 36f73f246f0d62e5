"""`path:line:col: severity: message [CODE]`, one finding a line, then a summary."""
from __future__ import annotations

from collections import Counter

from condhint.findings import SEVERITY_RANK, FileReport


def write(reports: list[FileReport], options: dict) -> str:
    minimum = SEVERITY_RANK[options.get("min_severity") or "warning"]
    lines = []
    shown = Counter()
    for rep in reports:
        for f in rep.findings:
            if f.rank < minimum:
                continue
            shown[f.severity] += 1
            lines.append(f"{f.location}: {f.severity}: {f.message} [{f.code}]")
            cell = f"cell {f.cell}:" if f.cell is not None else ""
            for line, note in f.related:
                lines.append(f"{f.path}:{cell}{line}:1: note: {note}")
    suppressed = sum(len(r.suppressed) for r in reports)
    # What could not be analysed is an info finding; hidden, it must still not read as "no findings".
    unread = sum(1 for r in reports for f in r.findings if f.code == "CH001" and f.rank < minimum)
    parts = [f"{shown[s]} {s}{'s' if shown[s] != 1 else ''}" for s in ("error", "warning", "info") if shown[s]]
    summary = f"{len(reports)} file{'s' if len(reports) != 1 else ''} checked: " + (", ".join(parts) or "no findings")
    if suppressed:
        summary += f" ({suppressed} suppressed)"
    if unread:
        summary += (f"; {unread} part{'s' if unread != 1 else ''} not analysed (CH001: syntax, budgets; "
                    "--min-severity info lists them)")
    lines.append(summary)
    return "\n".join(lines) + "\n"
