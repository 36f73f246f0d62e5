"""`# condhint: …` comments: range clauses, uncertainties and suppressions (design §4).

Clauses are read with `ast` and interpreted; nothing is evaluated.
"""
from __future__ import annotations

import ast
import io
import math
import re
import tokenize
from dataclasses import dataclass, field

from condhint.site import Interval

_MARK = re.compile(r"#\s*condhint\s*:(.*)$", re.I)
_UNCERTAINTY = re.compile(
    r"^(?P<name>[^\W\d][\w.]*)\s*(?:±|\+-|\+/-)\s*(?P<num>[0-9.eE+_-]+)\s*(?P<pct>%)?$"
)
_IGNORE = re.compile(r"^ignore(?:\s*\[(?P<codes>[^\]]*)\])?$", re.I)
_CODE = re.compile(r"^CH\d{3}$")


@dataclass
class Clauses:
    """What one comment says."""

    line: int
    intervals: dict[str, Interval] = field(default_factory=dict)
    uncertainty: dict[str, tuple[float | None, float | None]] = field(default_factory=dict)  # (relative, absolute)
    ignore: frozenset[str] | None = None  # None: no suppression; empty: all codes
    errors: list[str] = field(default_factory=list)


def find_comments(text: str) -> list[Clauses]:
    """All condhint comments of a file that tokenizes; a file that does not yields none."""
    out: list[Clauses] = []
    try:
        for tok in tokenize.generate_tokens(io.StringIO(text).readline):
            if tok.type == tokenize.COMMENT:
                m = _MARK.match(tok.string)
                if m:
                    out.append(parse_clauses(m.group(1), tok.start[0]))
    except (tokenize.TokenError, SyntaxError, IndentationError):
        pass
    return out


def split_top_level(text: str) -> list[str]:
    parts, depth, cur = [], 0, []
    for ch in text:
        if ch in "[(":
            depth += 1
        elif ch in "])":
            depth -= 1
        if ch == "," and depth == 0:
            parts.append("".join(cur))
            cur = []
        else:
            cur.append(ch)
    parts.append("".join(cur))
    return [p.strip() for p in parts if p.strip()]


PLACEHOLDERS = ("low", "high")  # what the editor's "declare the range" action writes for the user to fill in
_UNFILLED = "`{}` is a placeholder: replace it with the bound you know (a number)"


def parse_clauses(body: str, line: int) -> Clauses:
    result = Clauses(line)
    for clause in split_top_level(body):
        try:
            _parse_clause(clause, result)
        except ValueError as exc:
            result.errors.append(f"`{clause}`: {exc}")
    return result


def _number(node: ast.expr) -> float:
    """A numeric literal, possibly signed, or `inf`/`pi` spelled as such."""
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        v = _number(node.operand)
        return -v if isinstance(node.op, ast.USub) else v
    if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)) and not isinstance(node.value, bool):
        return float(node.value)
    if isinstance(node, ast.Name) and node.id in ("inf", "pi"):
        return math.inf if node.id == "inf" else math.pi
    if isinstance(node, ast.Name) and node.id in PLACEHOLDERS:
        raise ValueError(_UNFILLED.format(node.id))
    raise ValueError("bounds must be numeric literals")


def _name(node: ast.expr) -> str | None:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute) and _name(node.value):
        return f"{_name(node.value)}.{node.attr}"
    if (isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "len"
            and len(node.args) == 1 and not node.keywords and isinstance(node.args[0], ast.Name)):
        return f"len({node.args[0].id})"  # an array's length: the range of the input `len(xs)`
    return None


def _parse_clause(clause: str, result: Clauses) -> None:
    m = _IGNORE.match(clause)
    if m:
        codes = m.group("codes")
        names = frozenset(c.strip().upper() for c in codes.split(",") if c.strip()) if codes else frozenset()
        bad = [c for c in names if not _CODE.match(c)]
        if bad:
            raise ValueError(f"unknown code(s) {', '.join(sorted(bad))}")
        result.ignore = names if result.ignore is None else result.ignore | names
        return
    m = _UNCERTAINTY.match(clause)
    if m:
        value = float(m.group("num").replace("_", ""))
        if value < 0 or not math.isfinite(value):
            raise ValueError("an uncertainty must be a finite non-negative number")
        rel, ab = (value / 100.0, None) if m.group("pct") else (None, value)
        result.uncertainty[m.group("name")] = (rel, ab)
        return
    try:
        tree = ast.parse(clause, mode="eval").body
    except SyntaxError:
        raise ValueError("not a range (`lo <= x <= hi`, `x in [lo, hi]`), an uncertainty (`x ± 1%`) or `ignore`")
    if not isinstance(tree, ast.Compare):
        raise ValueError("expected a comparison such as `0 < x <= 1`")
    if len(tree.ops) == 1 and isinstance(tree.ops[0], ast.In):
        name = _name(tree.left)
        box = tree.comparators[0]
        if name is None or not isinstance(box, (ast.List, ast.Tuple)) or len(box.elts) != 2:
            raise ValueError("interval form is `x in [lo, hi]` (brackets closed, parentheses open)")
        lo, hi = (_number(e) for e in box.elts)
        is_open = isinstance(box, ast.Tuple)
        _add(result, name, Interval(lo, hi, is_open, is_open))
        return
    operands = [tree.left, *tree.comparators]
    for left, op, right in zip(operands, tree.ops, operands[1:]):
        _add(result, *_bound(left, op, right))


_FLIP = {ast.Lt: ast.Gt, ast.LtE: ast.GtE, ast.Gt: ast.Lt, ast.GtE: ast.LtE}


def _bound(left: ast.expr, op: ast.cmpop, right: ast.expr) -> tuple[str, Interval]:
    for side in (left, right):
        if isinstance(side, ast.Name) and side.id in PLACEHOLDERS:
            raise ValueError(_UNFILLED.format(side.id))
    name, other = _name(left), right
    if name is None:
        name, other = _name(right), left
        op = _FLIP.get(type(op), type(op))()  # type: ignore[operator]
    if name is None:
        raise ValueError("each comparison needs one name and one number")
    return name, interval_of(op, _number(other))


def interval_of(op: ast.cmpop, value: float) -> Interval:
    """The set of x with `x OP value`."""
    if isinstance(op, ast.Lt):
        return Interval(high=value, high_open=True)
    if isinstance(op, ast.LtE):
        return Interval(high=value)
    if isinstance(op, ast.Gt):
        return Interval(low=value, low_open=True)
    if isinstance(op, ast.GtE):
        return Interval(low=value)
    if isinstance(op, ast.Eq):
        return Interval(value, value)
    raise ValueError("use <, <=, >, >= or `in [lo, hi]`")


def _add(result: Clauses, name: str, interval: Interval) -> None:
    prev = result.intervals.get(name)
    new = interval if prev is None else prev.intersect(interval)
    if new.empty:
        raise ValueError(f"the range of {name} is empty")
    result.intervals[name] = new
