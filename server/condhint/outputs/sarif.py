"""SARIF 2.1.0 (OASIS): one run with our rules, results, fixes and in-source suppressions.

Columns count code points (`run.columnKind` says so); regions are 1-based with an exclusive end column.
Suppressed findings are included with an `inSource` suppression, so viewers can show or hide them.
"""
from __future__ import annotations

import json
from pathlib import PurePosixPath
from typing import Any
from urllib.parse import quote

from condhint import __version__
from condhint.expr import Span
from condhint.findings import FileReport, Finding, Fix
from condhint.kinds import KINDS
from condhint.site import source_label
from condhint.outputs.json_out import _clean

SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
LEVELS = {"error": "error", "warning": "warning", "info": "note"}
FINGERPRINT = "condhint/v1"


def uri(path: str) -> str:
    """A URI reference for a reported path: relative paths stay relative (to the directory of the run)."""
    p = path.replace("\\", "/")
    if p.startswith("/"):
        return "file://" + quote(p, safe="/")
    if len(p) > 1 and p[1] == ":":  # a Windows drive
        return "file:///" + quote(p, safe="/:")
    return quote(str(PurePosixPath(p)), safe="/")


def region(span: Span, snippet: str | None = None) -> dict[str, Any]:
    r: dict[str, Any] = {"startLine": span.line, "startColumn": span.col + 1,
                         "endLine": span.end_line, "endColumn": span.end_col + 1}
    if snippet:
        r["snippet"] = {"text": snippet}
    return r


def rules() -> list[dict[str, Any]]:
    out = []
    for k in KINDS:
        out.append({
            "id": k.code, "name": k.name,
            "shortDescription": {"text": k.title},
            "fullDescription": {"text": k.help},
            "help": {"text": k.help + " Figures are estimates over sampled inputs, not proofs."},
            # a rule's default level: what a finding of that kind usually is (the actual level follows digits)
            "defaultConfiguration": {"level": "warning" if k.category else "note"},
            "properties": {"category": k.category, "tags": ["numerics", "floating-point"]},
        })
    return out


def fix_object(fix: Fix, path: str, cell: int | None, source_text: Any = None) -> dict[str, Any]:
    """A SARIF fix: the replacement of the flagged range, and new import lines where imports go.

    `source_text(path, cell)` gives the text the lines refer to (to place imports); by default the file is read.
    """
    replacements = [{"deletedRegion": region(fix.span), "insertedContent": {"text": fix.replacement}}]
    if fix.imports:
        from condhint.review.sources import import_line, text_of

        text = (source_text or text_of)(path, cell)
        at = import_line(text)
        newline = "\r\n" if text and "\r\n" in text else "\n"
        replacements.insert(0, {
            "deletedRegion": {"startLine": at, "startColumn": 1, "endLine": at, "endColumn": 1},
            "insertedContent": {"text": "".join(i + newline for i in fix.imports)}})
    props: dict[str, Any] = {"measuredDigitsLostAfter": round(fix.measured_digits_lost_after, 2),
                             "measuredDigitsLostBefore": round(fix.measured_digits_lost_before, 2),
                             "rule": fix.rule, "proven": fix.proven, "imports": list(fix.imports)}
    if cell is not None:
        props["cell"] = cell
    return {"description": {"text": fix.title},
            "artifactChanges": [{"artifactLocation": {"uri": uri(path)}, "replacements": replacements}],
            "properties": props}


def _properties(f: Finding, cell: int | None) -> dict[str, Any]:
    props = {
        "category": f.category, "severity": f.severity, "kappa": f.kappa, "kappaFormula": f.kappa_formula,
        "digitsLost": f.digits_lost, "predictedDigitsLost": f.predicted_digits_lost,
        "measuredDigitsLost": f.measured_digits_lost, "fractionAffected": f.fraction_affected,
        "worstAt": dict(f.worst_at), "scope": f.scope, "expression": f.expression,
        "inputs": {k: {"low": v.low, "high": v.high, "source": source_label(v.source), "uncertainty": v.uncertainty}
                   for k, v in f.inputs.items()},
        "resultUncertainty": f.result_uncertainty, "format": f.format,
    }
    for key in ("digitsLost", "predictedDigitsLost", "measuredDigitsLost"):
        if props[key] is not None:
            props[key] = round(float(props[key]), 2)
    if props["kappa"] is not None:
        props["kappa"] = float(f"{props['kappa']:.3g}")
    if cell is not None:
        props["cell"] = cell
    return _clean({k: v for k, v in props.items() if v not in (None, {}, "")})


def result(f: Finding, rule_index: dict[str, int], artifact: int, source_text: Any = None) -> dict[str, Any]:
    cell = getattr(f, "cell", None)
    loc: dict[str, Any] = {"physicalLocation": {
        "artifactLocation": {"uri": uri(f.path), "index": artifact},
        "region": region(f.span, f.expression or None)}}
    if f.scope:
        loc["logicalLocations"] = [{"fullyQualifiedName": f.scope, "kind": "function"}]
    res: dict[str, Any] = {
        "ruleId": f.code, "ruleIndex": rule_index[f.code], "level": LEVELS[f.severity],
        "message": {"text": f.message}, "locations": [loc],
        "partialFingerprints": {FINGERPRINT: f.fingerprint()},
        "properties": _properties(f, cell),
    }
    if f.related:
        res["relatedLocations"] = [
            {"id": i, "message": {"text": note},
             "physicalLocation": {"artifactLocation": {"uri": uri(f.path), "index": artifact},
                                  "region": {"startLine": line}}}
            for i, (line, note) in enumerate(f.related, 1)]
    if f.fixes:
        res["fixes"] = [fix_object(x, f.path, cell, source_text) for x in f.fixes]
    if f.suppressed:
        res["suppressions"] = [{"kind": "inSource", "justification": "condhint: ignore comment"}]
    return res


def document(reports: list[FileReport], options: dict | None = None) -> dict[str, Any]:
    options = options or {}
    source_text = options.get("source_text")
    rule_list = rules()
    rule_index = {r["id"]: i for i, r in enumerate(rule_list)}
    artifacts, results, notes = [], [], []
    for rep in reports:
        index = len(artifacts)
        art: dict[str, Any] = {"location": {"uri": uri(rep.path)}}
        if rep.path.endswith(".ipynb"):
            art["mimeType"] = "application/x-ipynb+json"
        else:
            art["sourceLanguage"] = "python"
        artifacts.append(art)
        every = sorted([*rep.findings, *rep.suppressed], key=lambda f: (getattr(f, "cell", 0), f.span.line,
                                                                        f.span.col, f.code))
        results += [result(f, rule_index, index, source_text) for f in every]
        if rep.status not in ("ok", "skipped"):
            notes.append({"level": "warning" if rep.status == "error" else "note",
                          "message": {"text": f"{rep.path}: {rep.message or rep.status}"},
                          "locations": [{"physicalLocation": {"artifactLocation": {"uri": uri(rep.path),
                                                                                   "index": index}}}]})
    invocation: dict[str, Any] = {"executionSuccessful": True}
    if notes:
        invocation["toolExecutionNotifications"] = notes
    run = {
        "tool": {"driver": {"name": "condhint", "version": __version__, "semanticVersion": __version__,
                            "rules": rule_list}},
        "columnKind": "unicodeCodePoints",
        "artifacts": artifacts,
        "results": results,
        "invocations": [invocation],
    }
    return {"$schema": SCHEMA, "version": "2.1.0", "runs": [run]}


def write(reports: list[FileReport], options: dict) -> str:
    return json.dumps(document(reports, options), indent=2, ensure_ascii=False) + "\n"
