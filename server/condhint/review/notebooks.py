"""Jupyter notebooks: the code cells of an `.ipynb` file analysed as one module, findings located by cell.

The notebook is read with `json` (nothing is executed). Code cells are joined in order, so imports and
module-level names of earlier cells are known in later ones. IPython magic lines (`%…`, `!…`) become
`pass`; cells that start with a cell magic other than timing ones are skipped; a cell that does not parse
gets one CH001 finding and is left out. Lines and columns are counted within the cell; `cell` is the cell's
1-based position among all cells of the notebook (markdown cells included), as a reader counts them.
"""
from __future__ import annotations

import json
import time
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from condhint.config import Config
from condhint.engine import analyse_module
from condhint.expr import Span
from condhint.findings import SEVERITY_RANK, FileReport, Finding
from condhint.reading.module_index import parse
from condhint.site_findings import not_analysed

# Cell magics whose body is ordinary Python: only their first line is dropped.
PYTHON_CELL_MAGICS = {"time", "timeit", "capture", "prun"}


@dataclass
class CodeCell:
    number: int  # 1-based among all cells
    text: str  # as in the notebook
    code: str  # magics replaced; "" for a skipped cell
    note: str = ""  # why the cell is skipped


def _source(cell: dict[str, Any]) -> str:
    src = cell.get("source", "")
    if isinstance(src, list):
        return "".join(s for s in src if isinstance(s, str))
    return src if isinstance(src, str) else ""


def _without_magics(text: str) -> tuple[str, str]:
    lines = text.split("\n")
    first = lines[0].lstrip() if lines else ""
    if first.startswith("%%"):
        magic = first[2:].split(None, 1)[0] if first[2:].strip() else ""
        if magic not in PYTHON_CELL_MAGICS:
            return "", f"cell magic %%{magic} (not Python)"
        lines[0] = ""
    out = []
    for line in lines:
        stripped = line.lstrip()
        if stripped.startswith(("%", "!")):
            out.append(line[: len(line) - len(stripped)] + "pass")
        else:
            out.append(line)
    return "\n".join(out), ""


def read_cells(path: Path) -> list[CodeCell]:
    """The code cells of an nbformat 4 notebook file; ValueError with a reason when it is not one."""
    try:
        data = json.loads(path.read_bytes().decode("utf-8-sig"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ValueError(f"not a readable notebook: {exc}") from None
    return cells_of(data)


def cells_of(data: Any) -> list[CodeCell]:
    """The code cells of a notebook's decoded JSON."""
    if not isinstance(data, dict) or not isinstance(data.get("cells"), list):
        raise ValueError("not an nbformat 4 notebook (no `cells` list)")
    meta = data.get("metadata") if isinstance(data.get("metadata"), dict) else {}
    lang = (meta.get("language_info") or {}).get("name") or (meta.get("kernelspec") or {}).get("language")
    if isinstance(lang, str) and lang.lower() != "python":
        raise ValueError(f"the notebook's language is {lang}, not Python")
    cells = []
    for i, cell in enumerate(data["cells"], 1):
        if isinstance(cell, dict) and cell.get("cell_type") == "code":
            text = _source(cell)
            code, note = _without_magics(text)
            cells.append(CodeCell(i, text, code, note))
    return cells


def cell_texts(path: Path) -> dict[int, str]:
    return {c.number: c.text for c in read_cells(path)}


def _relocate(f: Finding, where: list[tuple[int, int, int]], path: str) -> Finding:
    """Map a finding of the joined text to its cell: `where` lists (first joined line, lines, cell)."""
    def locate(line: int) -> tuple[int, int]:
        for first, count, number in where:
            if first <= line < first + count:
                return number, line - first + 1
        return where[-1][2], max(1, line - where[-1][0] + 1)

    cell, line = locate(f.span.line)
    cell_end, end_line = locate(f.span.end_line)
    span = Span(line, f.span.col, end_line if cell_end == cell else line, f.span.end_col)
    related = []
    for ln, note in f.related:
        c, rl = locate(ln)
        related.append((rl, note if c == cell else f"{note} (cell {c})"))
    return replace(f, path=path, span=span, related=related, cell=cell)


def join_cells(cells: list[CodeCell], shown: str) -> tuple[str, list[tuple[int, int, int]], list[Finding]]:
    """The code cells that parse, joined: (text, [(first joined line, lines, cell)], CH001 of the others)."""
    where: list[tuple[int, int, int]] = []
    parts: list[str] = []
    bad: list[Finding] = []
    line = 1
    for cell in cells:
        if not cell.code.strip():
            continue
        _, problem = parse(cell.code)
        if problem is not None:
            why = f"{problem.message}; the file is not analysed until it parses" if problem.syntax else problem.message
            bad.append(replace(not_analysed(shown, problem.span, why), cell=cell.number))
            continue
        code = cell.code if cell.code.endswith("\n") else cell.code + "\n"
        count = code.count("\n")
        where.append((line, count, cell.number))
        parts.append(code)
        line += count
    return "".join(parts), where, bad


def joined_line(where: list[tuple[int, int, int]], cell: int, line: int) -> int | None:
    """The line of the joined text for `line` of `cell`."""
    for first, count, number in where:
        if number == cell and 1 <= line <= count:
            return first + line - 1
    return None


def check_notebook(path: Path, shown: str, cfg: Config) -> FileReport:
    t0 = time.perf_counter()
    try:
        cells = read_cells(path)
    except (OSError, ValueError) as exc:
        rep = FileReport(shown, "error", message=str(exc))
        rep.findings.append(not_analysed(shown, Span(1, 0, 1, 1), f"{shown}: {exc}"))
        return rep
    report = FileReport(shown, "ok")
    text, where, bad = join_cells(cells, shown)
    if bad:
        report.status = "syntax-error"
    report.lines = sum(c.text.count("\n") + 1 for c in cells)
    if text:
        analysis = analyse_module(text, shown, cfg)
        report.findings = [_relocate(f, where, shown) for f in analysis.report.findings]
        report.suppressed = [_relocate(f, where, shown) for f in analysis.report.suppressed]
        if analysis.report.status != "ok":
            report.status = analysis.report.status
    bad = [f for f in bad if SEVERITY_RANK[f.severity] >= SEVERITY_RANK[cfg.min_severity]]
    report.findings = sorted(bad + report.findings, key=lambda f: (f.cell, f.span.line, f.span.col, f.code))
    report.seconds = time.perf_counter() - t0
    return report
