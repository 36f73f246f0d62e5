"""`explain --plot FILE.png`: digits lost against one input over its range, as written and for each fix.

matplotlib is an optional extra (`pip install 'condhint[plot]'`); the Agg canvas is used directly, so no
display and no global pyplot state are involved.
"""
from __future__ import annotations

import math

import numpy as np

from condhint.review.explain import Explanation

COLOURS = ["#1b9e77", "#7570b3", "#e7298a", "#66a61e", "#e6ab02"]


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
    fig = Figure(figsize=(7.5, 4.6), dpi=110)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    for t, label in zip(thresholds, ("info", "warning", "error")):
        ax.axhline(t, color="#bbbbbb", linewidth=0.8, linestyle="-", zorder=0)
        ax.text(1.005, t, label, transform=ax.get_yaxis_transform(), fontsize=7, color="#888888", va="center")
    ax.plot(xs, p.measured[order], color="#d95f02", linewidth=2.0, label="as written: measured (vs mpmath)")
    ax.plot(xs, p.predicted[order], color="#d95f02", linewidth=1.0, linestyle="--",
            label="as written: predicted (rounding amplification)")
    with np.errstate(all="ignore"):
        risk = np.log10(np.maximum(np.nan_to_num(p.kappa, nan=1.0), 1.0))
    ax.plot(xs, np.minimum(risk, e.total_digits)[order], color="#555555", linewidth=1.0, linestyle=":",
            label="log₁₀ κ: digits at risk from input errors")
    for i, c in enumerate(x for x in e.candidates if x.profile is not None):
        ys = c.profile.measured
        if len(ys) == len(order):
            ax.plot(xs, ys[order], color=COLOURS[i % len(COLOURS)], linewidth=1.8,
                    label=f"fix: {_short(c.fix.replacement, 48)}")
    scale, kw = _scale(xs)
    ax.set_xscale(scale, **kw)
    ax.set_ylim(-0.4, math.ceil(e.total_digits) + 0.6)
    ax.set_xlabel(e.swept + ("   (other inputs at the worst case)" if e.held else ""))
    ax.set_ylabel(f"digits lost (of {e.total_digits:.0f}, {e.site.float_format.name})")
    ax.set_title(_short(e.site.root.text, 70), fontsize=10, family="monospace")
    ax.grid(True, which="major", color="#eeeeee", linewidth=0.6)
    ax.legend(fontsize=7.5, loc="best", framealpha=0.9)
    fig.text(0.01, 0.01, "condhint explain — estimates at sampled inputs, not proofs", fontsize=6.5, color="#888888")
    fig.tight_layout()
    fig.savefig(file, format="png")
