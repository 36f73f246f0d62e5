"""Splitting a tree across CI jobs: `--shard K/N` keeps the files whose path hashes to K (1-based) of N."""
from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass


@dataclass(frozen=True)
class Shard:
    index: int  # 1-based
    count: int

    def owns(self, path: str) -> bool:
        """Stable across machines and runs: a hash of the path as reported (not Python's salted hash)."""
        key = path.replace("\\", "/")
        while key.startswith("./"):
            key = key[2:]
        digest = hashlib.sha256(key.encode("utf-8", "surrogatepass")).digest()
        return int.from_bytes(digest[:8], "big") % self.count == self.index - 1


def parse_shard(text: str) -> Shard:
    """`K/N` with 1 <= K <= N; ValueError with a readable reason otherwise."""
    m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", text)
    if not m:
        raise ValueError(f"expected K/N such as 1/4, got {text!r}")
    k, n = int(m.group(1)), int(m.group(2))
    if not 1 <= k <= n:
        raise ValueError(f"need 1 <= K <= N, got {k}/{n}")
    return Shard(k, n)
