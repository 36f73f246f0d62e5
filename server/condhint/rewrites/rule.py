"""The vocabulary of a named rewrite rule (`Rule`), shared by `rules.py` and the modules of rule families it
collects (`overflow_rules.py`, `angle_rules.py`), so that those need not import `rules.py` itself."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from condhint.expr import Node
from condhint.rewrites.context import Context

Match = dict[str, Any]


@dataclass(frozen=True)
class Rule:
    id: str
    title: str  # the quick-fix menu text
    domain: str  # preconditions, in words
    source: str  # where the identity comes from
    match: Callable[[Node], Match | None]
    build: Callable[[Match, Context], list[Node]]
    requires: Callable[[Match, Context], bool] = lambda m, ctx: True
    cost: int = 1  # among equally accurate fixes the cheaper one is offered first

    def candidates(self, node: Node, ctx: Context) -> list[Node]:
        m = self.match(node)
        if m is None or not self.requires(m, ctx):
            return []
        return [c for c in self.build(m, ctx) if c is not None]
