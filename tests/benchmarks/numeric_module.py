"""Shared by the benchmarks: a generated, ordinary numeric Python module of a given size (invented code),
and the timing helpers and references (pyflakes) every benchmark compares against in the same run."""
from __future__ import annotations

import io
import random
import time
from typing import Callable

TEMPLATES = [
    # Mostly stable code, a few classic losses, as in real numeric modules.
    ("def {name}(x, y, z):\n"
     "    s = x * y + z\n"
     "    t = np.sqrt(x * x + 1.0) * y\n"
     "    return s / (t + 2.0)\n"),
    ("def {name}(mass, speed):\n"
     "    energy = 0.5 * mass * speed ** 2\n"
     "    momentum = mass * speed\n"
     "    return energy / momentum\n"),
    ("def {name}(r, n, t):  # condhint: 0.01 <= r <= 0.2, 1 <= n <= 365, 1 <= t <= 40\n"
     "    growth = (1 + r / n) ** (n * t)\n"
     "    return growth * 100.0\n"),
    ("def {name}(values, scale):\n"
     "    total = 0.0\n"
     "    for i in range(len(values)):\n"
     "        total += values[i] * scale\n"
     "    return total / len(values)\n"),
    ("def {name}(a, b):\n"
     "    mid = (a + b) / 2.0\n"
     "    spread = math.hypot(a, b)\n"
     "    return mid * spread + math.exp(-a)\n"),
    ("def {name}(x):  # condhint: 1e-9 <= x <= 1e-2\n"
     "    return np.exp(x) - 1.0\n"),
    ("def {name}(theta, length):\n"
     "    dx = length * math.cos(theta)\n"
     "    dy = length * math.sin(theta)\n"
     "    return math.atan2(dy, dx)\n"),
    ("def {name}(p, q):\n"
     "    if p <= 0:\n"
     "        raise ValueError('p must be positive')\n"
     "    ratio = q / p\n"
     "    return math.log(ratio) * 2.5\n"),
]


def numeric_module(lines: int, seed: int = 7) -> str:
    rng = random.Random(seed)
    out = ["import math", "import numpy as np", "", ""]
    i = 0
    while len("\n".join(out).splitlines()) < lines:
        out.append(rng.choice(TEMPLATES).format(name=f"func_{i}"))
        out.append("")
        i += 1
    return "\n".join(out) + "\n"


def best_of(fn: Callable[[], object], repeat: int = 3) -> float:
    """The fastest of `repeat` runs, in seconds."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def pyflakes_check(text: str) -> None:
    """pyflakes on `text`, its messages discarded: the ordinary checker our figures are compared with."""
    from pyflakes.api import check
    from pyflakes.reporter import Reporter

    check(text, "m.py", Reporter(io.StringIO(), io.StringIO()))
