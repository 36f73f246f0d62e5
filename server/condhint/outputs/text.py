"""`path:line:col: severity: message [CODE]`, one finding a line, then a summary. With the `mark_fixes`
option (fixes searched), findings that have a verified fix end in `[CODE] [verified fix]` and the summary
counts them."""
from __future__ import annotations

from collections import Counter

from condhint.findings import SEVERITY_RANK, FileReport

FIX_TAG = "[verified fix]"


def write(reports: list[FileReport], options: dict) -> str:
    minimum = SEVERITY_RANK[options.get("min_severity") or "warning"]
    mark = bool(options.get("mark_fixes"))
    lines = []
    shown = Counter()
    fixable = 0
    for rep in reports:
        for f in rep.findings:
            if f.rank < minimum:
                continue
            shown[f.severity] += 1
            tag = f" {FIX_TAG}" if mark and f.fixes else ""
            fixable += bool(tag)
            lines.append(f"{f.location}: {f.severity}: {f.message} [{f.code}]{tag}")
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
    if mark and sum(shown.values()):
        summary += (f"; {fixable} with a verified fix — run `condhint fix`" if fixable
                    else "; none with a verified fix")
    lines.append(summary)
    return "\n".join(lines) + "\n"
