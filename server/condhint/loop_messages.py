"""Messages of loop findings: accumulated rounding, cancellation inside a series, unstable recurrences."""
from __future__ import annotations

from dataclasses import dataclass

from condhint.config import Config
from condhint.expr import INPUT, topological
from condhint.messages import code, digits, num, pct, where
from condhint.numeric.formats import BINARY64
from condhint.numeric.loops import LoopAnalysis
from condhint.recurrence import Carried, Recurrence

_SUMS = ("add", "sub")


@dataclass(frozen=True)
class LoopFacts:
    """What a loop message is built from."""

    loop: Recurrence
    analysis: LoopAnalysis
    carried: Carried
    cfg: Config


def _how_measured(m: LoopFacts) -> str:
    a = m.analysis
    if a.all_lost_at is not None:
        return f"less than one correct digit is left by step {a.all_lost_at}"
    if not a.extrapolated:
        return f"measured against mpmath over all {a.steps} steps"
    law = (f"error ∝ k^{a.exponent:.2g}" if a.exponent is not None else
           f"error ×{num(a.factor)} per step" if a.factor is not None else "no growth")
    return (f"measured against mpmath over the first {a.measured_steps} steps ({digits(a.measured_digits)} digits) "
            f"and extrapolated with the fitted {law}")


def _head(m: LoopFacts, what: str) -> str:
    """The facts first, in one short sentence: "Loses 7.2 of 16 digits over 10000 steps, accumulated rounding."."""
    a = m.analysis
    return f"Loses {digits(a.digits)} of {BINARY64.digits:.0f} digits over {a.steps} steps, {what}."


def _lead(m: LoopFacts) -> str:
    a, c = m.analysis, m.carried
    return (f"after {a.steps} steps ({m.loop.trips_source}) {code(c.name)} has lost {digits(a.digits)} of "
            f"{BINARY64.digits:.0f} digits at {where(a.worst_at)} ({_how_measured(m)}; an estimate over sampled "
            f"inputs, ≥ {num(m.cfg.thresholds.info, 2)} digits on {pct(a.fraction)} of them)")


def accumulation_message(m: LoopFacts) -> str:
    """CH101 on a loop: rounding added up step after step (a running sum, a clock, a running product)."""
    op = m.carried.update.kind
    if op in _SUMS:
        counting = "Counting instead of accumulating (`t = t0 + i * dt`), " if _fixed_step(m) else ""
        remedy = (f"{counting}`math.fsum` of the terms, or compensated (Kahan) summation where the loop must stay, "
                  "avoids the drift")
    elif op in ("mul", "div"):
        remedy = ("Computing the product directly (a power, or `math.exp` of a `math.fsum` of logarithms) avoids "
                  "compounding a rounding at every step")
    else:
        remedy = "Computing the value directly instead of step by step avoids adding a rounding at every step"
    return f"{_head(m, 'accumulated rounding')} {code(m.carried.text)} accumulates rounding error: {_lead(m)}. {remedy}."


def _fixed_step(m: LoopFacts) -> bool:
    """Whether the carried name grows by the same increment at every step (a clock)."""
    up, moving = m.carried.update, {*m.loop.state_names, m.loop.counter, *m.loop.elements}
    return len(up.args) == 2 and not any(n.kind == INPUT and n.name in moving for n in topological(up.args[1]))


def series_message(m: LoopFacts) -> str:
    """CH101 on a loop whose partial values cancel (an alternating series summed term by term)."""
    a = m.analysis
    return (f"{_head(m, 'a cancelling series')} The series summed in {code(m.carried.text)} cancels: its partial sums grow to about "
            f"×{num(a.cancellation)} its final value, so the rounding errors of the largest terms swamp the "
            f"result; {_lead(m)}. Summing more accurately (`math.fsum`) does not recover these digits, as the "
            "terms' own rounding errors are magnified too: a closed form, or a series whose terms do not cancel "
            "(for example e⁻ˣ computed as 1/eˣ), avoids the loss.")


def recurrence_message(m: LoopFacts) -> str:
    """CH102: each step multiplies the error carried from the previous ones."""
    a = m.analysis
    grow = f"by about ×{num(a.factor)} per step" if a.factor is not None else "at every step"
    return (f"{_head(m, 'an unstable recurrence')} {code(m.carried.text)} is an unstable recurrence: each step multiplies the error already carried in "
            f"{code(m.carried.name)} {grow}, so the rounding of its starting value and of every step grows without "
            f"bound; {_lead(m)}. A closed form, or running the recurrence the other way (backwards, from a large "
            "index down, which damps the errors this direction amplifies), avoids it where the problem allows; a "
            "chaotic map has neither, and only higher precision delays the loss. No automatic fix is offered.")
