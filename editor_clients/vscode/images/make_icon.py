"""Draw the extension's icon (images/icon.png, 128x128): a kappa over a row of digits that fade out.

Run: python images/make_icon.py   (needs matplotlib)
"""
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
matplotlib.rcParams["mathtext.fontset"] = "cm"  # Computer Modern kappa, unlike a Latin k
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.patches import FancyBboxPatch  # noqa: E402

OUT = Path(__file__).with_name("icon.png")


def draw(path: Path = OUT) -> None:
    fig = plt.figure(figsize=(1.28, 1.28), dpi=100)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.axis("off")
    ax.add_patch(FancyBboxPatch((0.04, 0.04), 0.92, 0.92, boxstyle="round,pad=0,rounding_size=0.18",
                                facecolor="#1f3b57", edgecolor="none"))
    ax.text(0.5, 0.60, r"$\kappa$", color="#f2c14e", fontsize=60, ha="center", va="center")
    digits = "31415926"
    for i, d in enumerate(digits):
        alpha = max(0.12, 1.0 - i / (len(digits) - 2))  # digits lost to rounding fade away
        ax.text(0.14 + i * 0.103, 0.20, d, color="white", alpha=alpha, fontsize=11, ha="center",
                va="center", family="monospace", fontweight="bold")
    fig.savefig(path, transparent=True)
    plt.close(fig)


if __name__ == "__main__":
    draw()
