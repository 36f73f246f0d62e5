"""A compact Markdown summary for a code-review comment: one line of totals, one table of findings."""
from __future__ import annotations

from condhint.findings import SEVERITY_RANK, FileReport, Finding
from condhint.messages import num
from condhint.review.statistics import by_code

MAX_ROWS = 50  # a review comment stays readable; the rest is counted
ICONS = {"error": "🔴 error", "warning": "🟠 warning", "info": "🔵 info"}


def _cell(text: str) -> str:
    return " ".join(text.split()).replace("|", "\\|")


def _code(text: str, limit: int = 48) -> str:
    text = " ".join(text.split())
    if len(text) > limit:
        text = text[: limit - 1] + "…"
    fence = "``" if "`" in text else "`"
    pad = " " if fence == "``" else ""
    return f"{fence}{pad}{text.replace('|', chr(92) + '|')}{pad}{fence}"


def _where(f: Finding) -> str:
    cell = getattr(f, "cell", None)
    return f"{f.path}:{f'cell {cell}:' if cell else ''}{f.span.line}:{f.span.col + 1}"


def _figures(f: Finding) -> str:
    parts = []
    if f.digits_lost is not None:
        parts.append(f"{f.digits_lost:.1f}")
    return parts[0] if parts else "–"


def _fix(f: Finding) -> str:
    if not f.fixes:
        return "–"
    best = f.fixes[0]
    return f"{_code(best.replacement, 40)} ({best.measured_digits_lost_after:.1f} digits lost)"


def write(reports: list[FileReport], options: dict) -> str:
    minimum = SEVERITY_RANK[options.get("min_severity") or "warning"]
    shown = [f for r in reports for f in r.findings if f.rank >= minimum]
    shown.sort(key=lambda f: (-f.rank, -(f.digits_lost or 0), f.path, f.span.line))
    suppressed = sum(len(r.suppressed) for r in reports)
    counts = {s: sum(1 for f in shown if f.severity == s) for s in ("error", "warning", "info")}
    files = len(reports)
    total = ", ".join(f"{n} {s}{'s' if n != 1 and s != 'info' else ''}" for s, n in counts.items() if n)
    head = f"**condhint**: {total or 'no findings'} in {files} file{'s' if files != 1 else ''} checked"
    if suppressed:
        head += f" ({suppressed} suppressed in the code)"
    lines = [head, ""]
    if shown:
        lines += ["| | where | code | digits lost | κ | expression | verified fix |",
                  "|---|---|---|---:|---:|---|---|"]
        for f in shown[:MAX_ROWS]:
            kappa = num(f.kappa) if f.kappa is not None else "–"
            lines.append(f"| {ICONS[f.severity]} | `{_cell(_where(f))}` | {f.code} {f.name} | {_figures(f)} | "
                         f"{kappa} | {_code(f.expression) if f.expression else '–'} | {_fix(f)} |")
        if len(shown) > MAX_ROWS:
            lines.append(f"\n… and {len(shown) - MAX_ROWS} more (run `condhint check` for all).")
        stats = by_code(reports, options.get("min_severity") or "warning")
        if len(stats) > 1 or options.get("statistics"):
            lines += ["", "<details><summary>by code</summary>", "",
                      "| code | findings | suppressed | worst digits lost |", "|---|---:|---:|---:|"]
            for s in stats:
                worst = "–" if s.worst is None else f"{s.worst:.1f}"
                lines.append(f"| {s.code} {s.name} | {s.total} | {s.suppressed} | {worst} |")
            lines += ["", "</details>"]
        lines += ["", "_Digits lost of 16 (binary64), worst over the sampled range: estimates, not proofs._"]
    return "\n".join(lines) + "\n"
