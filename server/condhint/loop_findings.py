"""Loops read as recurrences -> findings and verified fixes.

Accumulated rounding and cancellation inside a series are CH101 avoidable-loss (a different computation
avoids them); an error that grows geometrically from step to step is CH102 unstable-recurrence. The one fix
offered, counting instead of accumulating a fixed increment (`t = t0 + (i + 1) * dt`), is verified by the
same measurement as the finding: it is kept only when it loses at least a digit less at the worst sample.
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any

from condhint.config import Config
from condhint.expr import CONST, INPUT, Node, Span, topological
from condhint.findings import Finding, Fix, InputInfo
from condhint.kinds import BY_CODE
from condhint.loop_messages import LoopFacts, accumulation_message, recurrence_message, series_message
from condhint.numeric.evaluate import BudgetExceeded, Deadline
from condhint.numeric.loops import LoopAnalysis, analyse_loop, fsum_digits
from condhint.numeric.sampling import resolve
from condhint.recurrence import Carried, Recurrence
from condhint.site_findings import not_analysed

LOOP = "#loop"  # a loop finding's origin is "<unit key>#loop<number>"
_NONE: Any = object()  # cached "nothing to report"
# On guessed (default) ranges a loop's loss must show on at least this share of the few samples a loop is
# iterated over: a loss only toward the ends of a guess says more about the guess than about the code.
GUESSED_SHARE = 0.5


def loop_number(origin: str) -> int | None:
    """The loop a finding's origin names (its index among the unit's recurrences), or None."""
    _, mark, number = origin.rpartition(LOOP)
    return int(number) if mark and number.isdigit() else None


def measure(rec: Recurrence, cfg: Config, cache: Any = None, only: str | None = None) -> LoopAnalysis | None:
    """The loop's measurement, from `cache` (get/put by key, like `engine.Lru`) when there."""
    key = f"{rec.key()}|{only}|{cfg.thresholds}|{cfg.default_range}"
    hit = cache.get(key) if cache is not None else None
    if hit is not None:
        return None if hit is _NONE else hit
    a = analyse_loop(rec, cfg, Deadline(cfg.site_budget), only)
    if cache is not None:
        cache.put(key, _NONE if a is None else a)
    return a


def loop_findings(recs: list[Recurrence], cfg: Config, path: str, key: str, cache: Any = None) -> list[Finding]:
    out: list[Finding] = []
    for number, rec in enumerate(recs):
        try:
            a = measure(rec, cfg, cache)
        except BudgetExceeded:
            out.append(not_analysed(path, rec.span, f"loop not analysed: iterating it exceeded the time budget of "
                                    f"{cfg.site_budget:g} s", rec.scope))
            continue
        except (MemoryError, OverflowError, ValueError, ZeroDivisionError) as exc:
            out.append(not_analysed(path, rec.span, f"loop not analysed: {type(exc).__name__}: {exc}", rec.scope))
            continue
        if a is None:
            continue
        f = _finding(rec, a, cfg, path, f"{key}{LOOP}{number}")
        if f is not None:
            out.append(f)
    return out


def _finding(rec: Recurrence, a: LoopAnalysis, cfg: Config, path: str, origin: str) -> Finding | None:
    kind = BY_CODE["CH102" if a.kind == "unstable" else "CH101"]
    severity = kind.severity(a, cfg)
    if severity is None or (not a.declared and a.fraction < GUESSED_SHARE):
        return None
    carried = next(c for c in rec.carried if c.name == a.name)
    facts = LoopFacts(rec, a, carried, cfg)
    build = recurrence_message if a.kind == "unstable" else series_message if a.kind == "series" else \
        accumulation_message
    inputs = {k: InputInfo(*resolve(r.interval, cfg.default_range), r.source, r.uncertainty)
              for k, r in rec.ranges.items() if k in set(rec.outer_inputs()) | set(rec.elements)}
    related = [(rec.span.line, f"the loop runs up to {rec.trips} times ({rec.trips_source})")]
    return Finding(path=path, span=carried.statement, code=kind.code, severity=severity, message=build(facts),
                   expression=carried.text, category=kind.category, digits_lost=a.digits,
                   measured_digits_lost=a.measured_digits, inputs=inputs, worst_at=a.worst_at,
                   fraction_affected=a.fraction, related=related, scope=rec.scope, origin=origin)


# ---- the fix: count instead of accumulating ---------------------------------------------------------------
def loop_fixes(rec: Recurrence, finding: Finding, cfg: Config, cache: Any = None) -> list[Fix]:
    """Verified fixes for a loop finding: counting instead of accumulating, or `math.fsum` of an array."""
    carried = next((c for c in rec.carried if c.statement == finding.span), None)
    if carried is None or carried.initial.kind != CONST:
        return []
    try:
        before = measure(rec, cfg, cache)
        if before is None or before.name != carried.name:
            return []
        found = (_fsum(rec, carried, before, cfg), _counting(rec, carried, before, cfg, cache),
                 _kahan(rec, carried, before, cfg, cache))
        return [f for f in found if f]
    except (BudgetExceeded, MemoryError, OverflowError, ValueError, ZeroDivisionError):
        return []


def _fsum(rec: Recurrence, carried: Carried, before: LoopAnalysis, cfg: Config) -> Fix | None:
    """`for x in xs: s += x` (s starting at 0, nothing else in the loop, x unused after it) becomes
    `s = math.fsum(xs)`: the exact sum correctly rounded, instead of a rounding at every step."""
    up = carried.update
    if not (rec.replaceable and rec.iterated and len(rec.carried) == 1 and carried.initial.value == 0
            and up.kind == "add" and up.args[0].kind == INPUT and up.args[0].name == carried.name
            and up.args[1].kind == INPUT and rec.elements == (up.args[1].name,) and not rec.outer_inputs()):
        return None
    after = fsum_digits(rec, cfg, rec.elements[0])
    if after > before.digits - 1.0:
        return None
    replacement = f"{carried.name} = math.fsum({rec.iterated})"
    return Fix(title=f"Sum with math.fsum (correctly rounded): {replacement}", replacement=replacement,
               span=rec.span, imports=["import math"], measured_digits_lost_after=after,
               measured_digits_lost_before=before.digits, rule="loop-fsum")


def _counting(rec: Recurrence, carried: Carried, before: LoopAnalysis, cfg: Config, cache: Any) -> Fix | None:
    """`t += dt` (t starting at a literal, dt fixed during the loop, `for i in range(start, stop)`) becomes
    `t = t0 + (i - start + 1) * dt`: the same value at every step up to rounding. Kept only when measured at
    least one digit better at the worst sample."""
    if rec.counter is None or rec.stride != 1:
        return None
    up = carried.update
    if up.kind != "add" or up.args[0].kind != INPUT or up.args[0].name != carried.name:
        return None
    inc = up.args[1]
    moving = {*rec.state_names, rec.counter, *rec.elements}
    if any(n.kind == INPUT and n.name in moving for n in topological(inc)) or not inc.text:
        return None
    i, done = rec.counter, 1 - rec.start
    count = i if done == 0 else f"({i} + {done})" if done > 0 else f"({i} - {-done})"
    step = inc.text if inc.is_leaf else f"({inc.text})"
    expr = f"{count} * {step}" if carried.initial.value == 0 else f"{carried.initial.text} + {count} * {step}"
    after = measure(_counted(rec, carried.name, done, inc, carried.initial), cfg, cache, only=carried.name)
    if after is None or after.digits > before.digits - 1.0:
        return None
    return Fix(title=f"Count steps instead of accumulating: {carried.name} = {expr}",
               replacement=f"{carried.name} = {expr}", span=carried.statement,
               measured_digits_lost_after=after.digits, measured_digits_lost_before=before.digits,
               rule="loop-counting")


def _kahan(rec: Recurrence, carried: Carried, before: LoopAnalysis, cfg: Config, cache: Any) -> Fix | None:
    """`s += term` inside a loop that must stay becomes compensated summation (Kahan 1965; Higham 2002, chapter
    on summation): in exact arithmetic the compensation stays 0 and `s` takes the same values, so only rounding
    changes. The loop is rewritten whole (the compensation starts at 0 before it); new names must be fresh."""
    up, s = carried.update, carried.name
    if up.kind != "add" or up.args[0].kind != INPUT or up.args[0].name != s or not rec.lines:
        return None
    term = up.args[1]
    if any(n.kind == INPUT and n.name == s for n in topological(term)) or not term.text:
        return None
    c, y, t = (f"{s}_{suffix}" for suffix in ("comp", "y", "t"))
    if {c, y, t} & rec.names:
        return None
    text = _kahan_text(rec, carried.statement, term.text if term.is_leaf else f"({term.text})", s, c, y, t)
    if text is None:
        return None
    zero = Node(CONST, value=0.0, exact="0", text="0.0")
    comp = Node(INPUT, name=c, text=c)
    yv = Node("sub", (term, comp))
    tv = Node("add", (up.args[0], yv))
    compensated = replace(rec, carried=tuple(replace(x, update=tv) if x.name == s else x for x in rec.carried) + (
        Carried(c, zero, Node("sub", (Node("sub", (tv, up.args[0])), yv)), carried.statement, ""),))
    after = measure(compensated, cfg, cache, only=s)
    if after is None or after.digits > before.digits - 1.0:
        return None
    return Fix(title=f"Compensated (Kahan) summation of {s}", replacement=text, span=rec.span,
               measured_digits_lost_after=after.digits, measured_digits_lost_before=before.digits,
               rule="loop-kahan")


def _kahan_text(rec: Recurrence, stmt: Span, term: str, s: str, c: str, y: str, t: str) -> str | None:
    """The loop's text with the statement replaced by the compensated update, preceded by `c = 0.0`; None when
    the statement does not stand alone on its lines."""
    loop = rec.span
    indent, lead = rec.lines[0][:loop.col], rec.lines[stmt.line - loop.line][:stmt.col]
    tail = rec.lines[stmt.end_line - loop.line][stmt.end_col:]
    if indent.strip() or lead.strip() or tail.strip():
        return None
    body = [f"{y} = {term} - {c}", f"{t} = {s} + {y}", f"{c} = ({t} - {s}) - {y}", f"{s} = {t}"]
    lines = list(rec.lines)
    lines[stmt.line - loop.line:stmt.end_line - loop.line + 1] = [lead + b for b in body]
    text = "\n".join(lines)
    # the replaced range ends where the loop does: keep what follows it on its last line out of the text
    end = len(text) if stmt.end_line == loop.end_line else len(text) - (len(rec.lines[-1]) - loop.end_col)
    return f"{c} = 0.0\n{indent}" + text[loop.col:end]


def _counted(rec: Recurrence, name: str, done: int, inc: Node, initial: Node) -> Recurrence:
    """The loop with `name` computed from the counter: initial + (counter + done) * inc."""
    i = Node(INPUT, name=rec.counter, text=rec.counter or "", is_int=True)
    n = i if done == 0 else Node("add", (i, Node(CONST, value=float(done), exact=str(done), is_int=True)), is_int=True)
    value = Node("mul", (n, inc))
    if initial.value != 0:
        value = Node("add", (initial, value))
    carried = tuple(replace(c, update=value) if c.name == name else c for c in rec.carried)
    return replace(rec, carried=carried)
