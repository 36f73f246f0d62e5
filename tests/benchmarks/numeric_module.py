"""A generated, ordinary numeric Python module of a given size (invented code for benchmarks)."""
from __future__ import annotations

import random

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
