"""The one findings model every output (text, JSON, SARIF, Markdown, LSP) is written from."""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Any

from condhint.expr import Span

CODES = {
    "CH001": ("not-analysed", None),
    "CH101": ("avoidable-loss", "formula"),
    "CH201": ("input-sensitivity", "inherent"),
    "CH301": ("overflow-risk", "overflow"),
    "CH302": ("domain-risk", "domain"),
}
CODE_OF_CATEGORY = {cat: code for code, (_, cat) in CODES.items() if cat}
SEVERITY_RANK = {"info": 1, "warning": 2, "error": 3}

RULE_HELP = {
    "CH001": "condhint could not analyse this code (a syntax error, an unreadable file, a comment it does not "
             "understand, or an expression over its time budget). The rest of the file is analysed.",
    "CH101": "The formula loses digits to its own rounding at inputs on its range, although the result itself is "
             "well-conditioned: an algebraically equivalent formula can be more accurate.",
    "CH201": "The result is sensitive to its inputs (large condition number κ): errors already in the inputs are "
             "magnified by κ. No rewrite of this formula helps; reduce the error of the inputs upstream.",
    "CH301": "An intermediate value overflows or underflows on the range while the true result is an ordinary "
             "number.",
    "CH302": "Rounding pushes an argument outside a function's domain (or the declared range leaves it), so the "
             "code returns nan or raises where the exact formula is defined.",
}


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

    def to_dict(self) -> dict[str, Any]:
        return {"title": self.title, "replacement": self.replacement, "line": self.span.line,
                "column": self.span.col + 1, "end_line": self.span.end_line, "end_column": self.span.end_col + 1,
                "imports": list(self.imports), "measured_digits_lost_after": round(self.measured_digits_lost_after, 2),
                "rule": self.rule, "proven": self.proven}


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
    site_key: str = field(default="", repr=False)  # structural key of the analysed expression

    @property
    def name(self) -> str:
        return CODES[self.code][0]

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
            "kappa_formula": self.kappa_formula,
            "inputs": {k: {"low": v.low, "high": v.high, "uncertainty": v.uncertainty, "source": v.source}
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
