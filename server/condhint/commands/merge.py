"""`condhint merge FILE…`: combine the JSON or SARIF results of `check --shard K/N` runs into one.

Files come out in the order one unsharded run reports them (`runner.path_order`), each with its findings in
their original order, so merging all shards gives the unsharded document (timings aside).
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any
from urllib.parse import unquote

from condhint.commands.common import UsageError
from condhint.findings import SEVERITY_RANK
from condhint.runner import path_order
from condhint.sourcefile import UnreadableFile, read_json

LEVEL_RANK = {"note": 1, "warning": 2, "error": 3, "none": 0}


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("merge", help="combine JSON or SARIF results of sharded runs", description=(
        "Combine the results of `condhint check --shard K/N --format json|sarif` runs into one document."))
    p.add_argument("files", nargs="+", metavar="FILE", help="results of the shards (all JSON or all SARIF)")
    p.add_argument("--format", choices=("json", "sarif"), help="output format (default: the inputs' format)")
    p.add_argument("--output", metavar="FILE", help="write the merged document to FILE instead of stdout")
    p.add_argument("--fail-on", choices=("info", "warning", "error"),
                   help="exit 1 when a merged finding reaches this severity (default: exit 0)")
    p.set_defaults(run=run)


def _kind(doc: Any) -> str | None:
    if isinstance(doc, dict) and doc.get("version") == "2.1.0" and isinstance(doc.get("runs"), list):
        return "sarif"
    if isinstance(doc, dict) and isinstance(doc.get("findings"), list) and isinstance(doc.get("files"), list):
        return "json"
    return None


def _load(path: str) -> tuple[str, dict]:
    try:
        doc = read_json(Path(path))
    except UnreadableFile as exc:
        raise UsageError(f"{path}: {exc}") from None
    kind = _kind(doc)
    if kind is None:
        raise UsageError(f"{path}: neither condhint JSON nor SARIF 2.1.0")
    return kind, doc


def merge_json(docs: list[dict]) -> dict:
    files: list[dict] = []
    findings: dict[str, list[dict]] = {}
    seen: set[str] = set()
    for doc in docs:
        mine = {f.get("path") for f in doc["files"]} - seen
        files += [f for f in doc["files"] if f.get("path") in mine]
        for f in doc["findings"]:
            if f.get("path") in mine:
                findings.setdefault(f["path"], []).append(f)
        seen |= mine
    files.sort(key=lambda f: path_order(str(f.get("path", ""))))
    ordered = [f for entry in files for f in findings.pop(entry["path"], [])]
    ordered += [f for rest in findings.values() for f in rest]  # findings of files not listed (hand-made input)
    return {"version": docs[0].get("version", 1), "tool": docs[0].get("tool"), "findings": ordered,
            "suppressed": sum(int(d.get("suppressed") or 0) for d in docs), "files": files}


def _uri_key(uri: str) -> tuple:
    return path_order(unquote(uri[len("file://"):] if uri.startswith("file://") else uri))


def merge_sarif(docs: list[dict]) -> dict:
    runs = [run for doc in docs for run in doc["runs"]]
    first = runs[0]
    rules: list[dict] = []
    rule_ids: dict[str, int] = {}
    artifacts: list[tuple[dict, list[dict]]] = []  # (artifact, its results)
    by_uri: dict[str, int] = {}
    notes: list[dict] = []
    successful = True
    loose: list[dict] = []
    for run in runs:
        for rule in run.get("tool", {}).get("driver", {}).get("rules", []):
            if rule["id"] not in rule_ids:
                rule_ids[rule["id"]] = len(rules)
                rules.append(rule)
        own = run.get("artifacts", [])
        index_map: dict[int, int] = {}
        for i, art in enumerate(own):
            u = art.get("location", {}).get("uri", "")
            if u not in by_uri:
                by_uri[u] = len(artifacts)
                artifacts.append((art, []))
            index_map[i] = by_uri[u]
        for res in run.get("results", []):
            loc = (res.get("locations") or [{}])[0].get("physicalLocation", {}).get("artifactLocation", {})
            target = index_map.get(loc.get("index", -1), by_uri.get(loc.get("uri", "")))
            (artifacts[target][1] if target is not None else loose).append(res)
        for inv in run.get("invocations", []):
            successful &= bool(inv.get("executionSuccessful", True))
            notes += inv.get("toolExecutionNotifications", [])
    order = sorted(range(len(artifacts)), key=lambda i: _uri_key(artifacts[i][0].get("location", {}).get("uri", "")))
    new_index = {old: new for new, old in enumerate(order)}
    results = []
    for old in order:
        for res in artifacts[old][1]:
            results.append(_reindex(res, new_index, by_uri, rule_ids))
    results += [_reindex(r, new_index, by_uri, rule_ids) for r in loose]
    run = {k: v for k, v in first.items() if k not in ("tool", "artifacts", "results", "invocations")}
    driver = dict(first.get("tool", {}).get("driver", {}), rules=rules)
    invocation: dict[str, Any] = {"executionSuccessful": successful}
    if notes:
        invocation["toolExecutionNotifications"] = [_reindex_note(n, new_index, by_uri) for n in notes]
    run = {"tool": {**first.get("tool", {}), "driver": driver}, **run,
           "artifacts": [artifacts[i][0] for i in order], "results": results, "invocations": [invocation]}
    return {"$schema": docs[0].get("$schema"), "version": "2.1.0", "runs": [run]}


def _reindex_location(loc: dict, new_index: dict[int, int], by_uri: dict[str, int]) -> dict:
    phys = loc.get("physicalLocation")
    if not phys or "artifactLocation" not in phys:
        return loc
    art = dict(phys["artifactLocation"])
    if art.get("uri") in by_uri:
        art["index"] = new_index[by_uri[art["uri"]]]
    return {**loc, "physicalLocation": {**phys, "artifactLocation": art}}


def _reindex(res: dict, new_index: dict[int, int], by_uri: dict[str, int], rule_ids: dict[str, int]) -> dict:
    out = dict(res)
    if "ruleId" in out and out["ruleId"] in rule_ids:
        out["ruleIndex"] = rule_ids[out["ruleId"]]
    for key in ("locations", "relatedLocations"):
        if key in out:
            out[key] = [_reindex_location(loc, new_index, by_uri) for loc in out[key]]
    return out


def _reindex_note(note: dict, new_index: dict[int, int], by_uri: dict[str, int]) -> dict:
    if "locations" not in note:
        return note
    return {**note, "locations": [_reindex_location(loc, new_index, by_uri) for loc in note["locations"]]}


def _worst(kind: str, doc: dict) -> int:
    if kind == "json":
        return max((SEVERITY_RANK.get(f.get("severity"), 0) for f in doc["findings"]), default=0)
    return max((LEVEL_RANK.get(r.get("level", "warning"), 2) for run in doc["runs"] for r in run["results"]
                if not r.get("suppressions")), default=0)


def run(args: argparse.Namespace) -> int:
    loaded = [_load(p) for p in args.files]
    kinds = {k for k, _ in loaded}
    if len(kinds) > 1:
        raise UsageError("cannot merge JSON and SARIF results together: give all shards in one format")
    kind = kinds.pop()
    if args.format and args.format != kind:
        raise UsageError(f"the inputs are {kind.upper()}; merge them to {kind} (convert by re-running "
                         f"`condhint check --format {args.format}`)")
    docs = [d for _, d in loaded]
    merged = merge_json(docs) if kind == "json" else merge_sarif(docs)
    text = json.dumps(merged, indent=2, ensure_ascii=False) + "\n"
    if args.output:
        from condhint.atomic import write_text_atomic

        write_text_atomic(Path(args.output), text)
    else:
        sys.stdout.write(text)
    if args.fail_on:
        return 1 if _worst(kind, merged) >= SEVERITY_RANK[args.fail_on] else 0
    return 0
