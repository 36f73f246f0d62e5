"""The one findings model every output (text, JSON, SARIF, Markdown, LSP) is written from."""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Any

from condhint.expr import Span
from condhint.kinds import BY_CODE
from condhint.site import source_label

SEVERITY_RANK = {"info": 1, "warning": 2, "error": 3}


@dataclass
class Fix:
    title: str
    replacement: str
    span: Span  # the source range replaced
    imports: list[str] = field(default_factory=list)  # import statements the replacement needs
    measured_digits_lost_after: float = 0.0
    measured_digits_lost_before: float = 0.0
    rule: str = ""
    proven: bool = False  # equivalence proven symbolically (always also checked numerically)
    note: str = ""  # a comment the fix leaves at the end of its line (where an approximation holds)

    def to_dict(self) -> dict[str, Any]:
        return {"title": self.title, "replacement": self.replacement, "line": self.span.line,
                "column": self.span.col + 1, "end_line": self.span.end_line, "end_column": self.span.end_col + 1,
                "imports": list(self.imports), "measured_digits_lost_after": round(self.measured_digits_lost_after, 2),
                "rule": self.rule, "proven": self.proven, **({"note": self.note} if self.note else {})}


@dataclass
class InputInfo:
    low: float
    high: float
    source: str
    uncertainty: float | None = None  # relative
    kappa: float | None = None  # worst κᵢ


@dataclass
class Finding:
    path: str
    span: Span
    code: str
    severity: str
    message: str
    expression: str = ""
    category: str | None = None
    digits_lost: float | None = None
    predicted_digits_lost: float | None = None
    measured_digits_lost: float | None = None
    kappa: float | None = None
    kappa_formula: str | None = None
    inputs: dict[str, InputInfo] = field(default_factory=dict)
    worst_at: dict[str, float] = field(default_factory=dict)
    fraction_affected: float | None = None
    fixes: list[Fix] = field(default_factory=list)
    related: list[tuple[int, str]] = field(default_factory=list)  # (line, note) for multi-statement formulas
    scope: str = ""
    result_uncertainty: float | None = None  # relative, from declared input uncertainties
    suppressed: bool = False
    cell: int | None = None  # notebooks: the 1-based cell the span's lines count within
    format: str = "binary64"  # the number format the flagged operation's result is counted in
    origin: str = field(default="", repr=False)  # the analysed site: see `engine.ModuleAnalysis.site_of`

    @property
    def name(self) -> str:
        return BY_CODE[self.code].name

    @property
    def rank(self) -> int:
        return SEVERITY_RANK[self.severity]

    def fingerprint(self) -> str:
        """Survives unrelated edits: built from the file, scope, code and the expression's text, not lines."""
        text = " ".join(self.expression.split())
        return hashlib.sha256(f"{self.path}\0{self.scope}\0{self.code}\0{text}".encode()).hexdigest()[:20]

    @property
    def location(self) -> str:
        """`path:line:col` as a reader looks it up (`path:cell N:line:col` in a notebook)."""
        cell = f"cell {self.cell}:" if self.cell is not None else ""
        return f"{self.path}:{cell}{self.span.line}:{self.span.col + 1}"

    def to_dict(self) -> dict[str, Any]:
        def r(v: float | None, nd: int = 2) -> float | None:
            return None if v is None else round(float(v), nd)

        return {
            "path": self.path, "line": self.span.line, "column": self.span.col + 1,
            "end_line": self.span.end_line, "end_column": self.span.end_col + 1,
            "code": self.code, "name": self.name, "category": self.category, "severity": self.severity,
            "message": self.message, "expression": self.expression,
            "digits_lost": r(self.digits_lost), "predicted_digits_lost": r(self.predicted_digits_lost),
            "measured_digits_lost": r(self.measured_digits_lost),
            "kappa": None if self.kappa is None else float(f"{self.kappa:.3g}"),
            "kappa_formula": self.kappa_formula, "format": self.format,
            "inputs": {k: {"low": v.low, "high": v.high, "uncertainty": v.uncertainty, "source": source_label(v.source)}
                       for k, v in self.inputs.items()},
            "worst_at": {k: float(f"{v:.6g}") for k, v in self.worst_at.items()},
            "fraction_affected": r(self.fraction_affected, 3),
            "result_uncertainty": r(self.result_uncertainty, 4),
            "fixes": [f.to_dict() for f in self.fixes],
            "related": [{"line": ln, "message": m} for ln, m in self.related],
            "scope": self.scope, "fingerprint": self.fingerprint(),
            **({"cell": self.cell} if self.cell is not None else {}),
        }


@dataclass
class FileReport:
    path: str
    status: str  # "ok", "syntax-error", "skipped", "error"
    findings: list[Finding] = field(default_factory=list)
    suppressed: list[Finding] = field(default_factory=list)
    seconds: float = 0.0
    message: str = ""
    lines: int = 0

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"path": self.path, "status": self.status, "seconds": round(self.seconds, 4)}
        if self.message:
            d["message"] = self.message
        return d
