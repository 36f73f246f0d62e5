"""`explain --plot FILE.png`: correct digits kept against one input over its range — as written, for each fix,
and the most any formula can keep there (the κ limit); the area between is the avoidable loss.

matplotlib is an optional extra (`pip install 'condhint[plot]'`); the Agg canvas is used directly, so no
display and no global pyplot state are involved.
"""
from __future__ import annotations

import math

import numpy as np

from condhint.messages import num
from condhint.review.explain import Explanation

# Okabe & Ito's colour-blind-safe palette (2008); lines also differ by style, so they read in grey too.
LIMIT, AS_WRITTEN, AVOIDABLE = "#000000", "#D55E00", "#E69F00"
FIX_COLOURS = ["#0072B2", "#009E73", "#CC79A7", "#56B4E9"]
FIX_STYLES = ["-", "-.", (0, (5, 1, 1, 1)), (0, (1, 1))]


class PlotUnavailable(Exception):
    """matplotlib is not installed."""


def _scale(xs: np.ndarray) -> tuple[str, dict]:
    lo, hi = float(np.min(xs)), float(np.max(xs))
    if lo > 0 and hi / lo > 10:
        return "log", {}
    if hi < 0 and lo / hi > 10:
        return "symlog", {"linthresh": abs(hi)}
    if lo < 0 < hi:
        small = np.min(np.abs(xs[xs != 0])) if np.any(xs != 0) else 1.0
        if max(-lo, hi) / small > 100:
            return "symlog", {"linthresh": float(small)}
    return "linear", {}


def _short(text: str, limit: int = 60) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


def plot(e: Explanation, file: str, thresholds: tuple[float, float, float] = (2.0, 4.0, 8.0)) -> None:
    """Digits the formula keeps against the most any formula can keep at those inputs (the κ limit:
    all digits less log₁₀ κ): the area between the two curves is the avoidable loss; the fixes are drawn too."""
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise PlotUnavailable("--plot needs matplotlib: pip install 'condhint[plot]'") from None
    p = e.curve
    if e.swept is None:
        raise ValueError("the expression has no input that varies: nothing to plot against")
    xs = p.cols[e.swept]
    order = np.argsort(xs)
    xs = xs[order]
    total = e.total_digits
    with np.errstate(all="ignore"):
        at_risk = np.minimum(np.log10(np.maximum(np.nan_to_num(p.kappa, nan=1.0), 1.0)), total)[order]
    limit = total - at_risk
    kept = np.clip(total - p.measured[order], 0.0, total)
    fig = Figure(figsize=(7.5, 4.8), dpi=110)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    for t, label in zip(thresholds, ("info", "warning", "error")):
        ax.axhline(total - t, color="#cccccc", linewidth=0.8, zorder=0)
        ax.text(1.005, total - t, f"{label}: {t:g} lost", transform=ax.get_yaxis_transform(), fontsize=7,
                color="#777777", va="center")
    ax.fill_between(xs, kept, limit, where=limit > kept, color=AVOIDABLE, alpha=0.35, linewidth=0,
                    label="avoidable loss (a better formula keeps these digits)")
    ax.plot(xs, limit, color=LIMIT, linewidth=1.6, linestyle="--",
            label="the most any formula can keep here (limit set by κ)")
    ax.plot(xs, kept, color=AS_WRITTEN, linewidth=2.2, label="this code keeps (measured against mpmath)")
    for i, c in enumerate(x for x in e.candidates if x.profile is not None):
        ys = c.profile.measured
        if len(ys) == len(order):
            ax.plot(xs, np.clip(total - ys[order], 0.0, total), color=FIX_COLOURS[i % len(FIX_COLOURS)],
                    linewidth=1.6, linestyle=FIX_STYLES[i % len(FIX_STYLES)],
                    label=f"with the fix {_short(c.fix.replacement, 44)}")
    r = e.site.ranges.get(e.swept)
    declared = r is not None and r.source.startswith("comment")
    lo, hi = float(xs[0]), float(xs[-1])
    for edge in (lo, hi):
        ax.axvline(edge, color="#777777", linewidth=0.8, linestyle=(0, (2, 2)))
    ax.text(0.5, 1.01, f"{'declared' if declared else 'assumed (a guess: declare it)'} range of {e.swept}: "
            f"[{num(lo, 3)}, {num(hi, 3)}]", transform=ax.transAxes, fontsize=7.5, ha="center", va="bottom",
            color="#444444")
    scale, kw = _scale(xs)
    ax.set_xscale(scale, **kw)
    ax.set_ylim(-0.4, math.ceil(total) + 0.6)
    ax.set_xlabel(e.swept + ("   (other inputs held at the worst case)" if e.held else ""))
    ax.set_ylabel(f"correct digits kept (of {total:.0f}, {e.site.float_format.name})")
    fig.suptitle(_short(e.site.root.text, 70), fontsize=10, family="monospace")
    ax.grid(True, which="major", color="#eeeeee", linewidth=0.6)
    ax.legend(fontsize=7.2, loc="lower left", framealpha=0.92)
    fig.text(0.01, 0.01, "condhint explain — estimates at sampled inputs, not proofs", fontsize=6.5, color="#777777")
    fig.tight_layout()
    fig.savefig(file, format="png")
