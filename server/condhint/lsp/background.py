"""Work that enriches hover and code actions when it is ready: κ formulas and verified rewrites.

sympy cannot be interrupted inside a thread, so κ formulas run in the core's worker process
(`condhint.budget`), which is killed and replaced when a formula overruns its budget. Rewrites come from
`condhint.fixing` when the rewrites package is installed.
Each kind has one thread; a request from a hover or a code action goes before queued background jobs.
"""
from __future__ import annotations

import asyncio
import logging
from concurrent.futures import ThreadPoolExecutor
from typing import Any, Callable

from condhint.config import Config
from condhint.engine import AnalysisCache, ModuleAnalysis
from condhint.expr import Node
from condhint.findings import Finding, Fix
from condhint.fixing import fixes_for, rewrites
from condhint.site import Site

log = logging.getLogger(__name__)


def formula_key(site: Site, node: Node) -> str:
    positive = {k for k, r in site.ranges.items() if r.interval.low >= 0}
    return f"{node.key()}|{sorted(positive)}"


def fix_key(finding: Finding) -> str:
    """Fixes depend on the finding's unit (its key holds the unit's text, place and context) and its range."""
    s = finding.span
    return f"{finding.origin}\0{finding.code}\0{s.line}:{s.col}:{s.end_line}:{s.end_col}"


class Jobs:
    """Results by key, computed once on a single thread; `want` puts a job ahead of queued ones.

    Queued jobs start only while `gate` is set: the server clears it while a document analysis is due, so
    background work does not compete with the analysis the user waits for.
    """

    def __init__(self, name: str, gate: asyncio.Event | None = None) -> None:
        self.gate = gate
        self.pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix=name)
        self.done: dict[str, Any] = {}
        self.running: dict[str, asyncio.Future] = {}
        self._queue: list[tuple[str, Callable[[], Any]]] = []
        self._drain: asyncio.Task | None = None
        self.closed = False

    def get(self, key: str) -> tuple[bool, Any]:
        """(ready, value)."""
        if key in self.done:
            return True, self.done[key]
        return False, None

    def want(self, key: str, job: Callable[[], Any]) -> asyncio.Future:
        """Start the job now (it waits only for the job already running) or join it if it runs."""
        fut = self.running.get(key)
        if fut is not None:
            return fut
        loop = asyncio.get_running_loop()
        fut = loop.run_in_executor(self.pool, job)
        self.running[key] = fut
        fut.add_done_callback(lambda f, k=key: self._finish(k, f))
        return fut

    def later(self, key: str, job: Callable[[], Any]) -> None:
        """Queue the job for when nothing more urgent runs."""
        if self.closed or key in self.done or key in self.running or any(k == key for k, _ in self._queue):
            return
        self._queue.append((key, job))
        if self._drain is None or self._drain.done():
            self._drain = asyncio.get_running_loop().create_task(self._run_queue())

    def forget_queue(self) -> None:
        self._queue.clear()

    async def _run_queue(self) -> None:
        while self._queue and not self.closed:
            if self.gate is not None:
                await self.gate.wait()
                if not self._queue or self.closed:
                    return
            key, job = self._queue.pop(0)
            if key in self.done:
                continue
            try:
                await asyncio.shield(self.want(key, job))
            except Exception:  # noqa: BLE001 - a failed job only means no enrichment
                log.exception("background job %s failed", key[:60])

    def _finish(self, key: str, fut: asyncio.Future) -> None:
        self.running.pop(key, None)
        if fut.cancelled():
            return
        exc = fut.exception()
        self.done[key] = None if exc is not None else fut.result()
        if exc is not None and not self.closed:
            log.warning("background job failed: %r", exc)
        while len(self.done) > 2_000:  # bounded: enrichments of old versions are rarely asked again
            self.done.pop(next(iter(self.done)))

    def shutdown(self) -> None:
        self.closed = True
        self._queue.clear()
        self.pool.shutdown(wait=False, cancel_futures=True)


class Background:
    def __init__(self) -> None:
        self.idle = asyncio.Event()  # set while no document analysis is due
        self.idle.set()
        self.formulas = Jobs("condhint-formula", self.idle)
        self.fixes = Jobs("condhint-fixes", self.idle)
        # Subexpression analyses for hover: not queued behind whole-document analyses.
        self.hover_pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="condhint-hover")
        self.hover_cache = AnalysisCache(capacity=2000)  # used by the hover thread only

    # ---- κ formulas -----------------------------------------------------------------------------------------
    def warm_up(self) -> None:
        """Start the formula worker process now (importing sympy takes a while)."""
        from condhint.budget import OverBudget, run_with_budget
        from condhint.hover import warm_up

        def job() -> bool:
            try:
                return bool(run_with_budget(warm_up, (), 120.0))
            except (OverBudget, RuntimeError):
                return False

        self.formulas.want("\0warm-up", job)

    @staticmethod
    def _formula_job(site: Site, node: Node, cfg: Config) -> Callable[[], str | None]:
        def job() -> str | None:
            from condhint.engine import kappa_formula

            return kappa_formula(site, cfg, node)

        return job

    def formula(self, site: Site, node: Node) -> tuple[bool, str | None]:
        return self.formulas.get(formula_key(site, node))

    def want_formula(self, site: Site, node: Node, cfg: Config) -> asyncio.Future:
        return self.formulas.want(formula_key(site, node), self._formula_job(site, node, cfg))

    def formula_later(self, site: Site, node: Node, cfg: Config) -> None:
        self.formulas.later(formula_key(site, node), self._formula_job(site, node, cfg))

    # ---- rewrites -------------------------------------------------------------------------------------------
    @staticmethod
    def _fix_job(finding: Finding, ma: ModuleAnalysis, cfg: Config) -> Callable[[], list[Fix]]:
        def job() -> list[Fix]:
            return fixes_for(finding, ma, cfg)

        return job

    def fixes_of(self, finding: Finding) -> tuple[bool, list[Fix]]:
        """(ready, fixes) of a finding in document positions: the engine's own, else the rewrite search's."""
        if finding.fixes:
            return True, list(finding.fixes)
        if finding.code == "CH001":
            return True, []
        ready, value = self.fixes.get(fix_key(finding))
        return ready, list(value or [])

    def want_fixes(self, finding: Finding, ma: ModuleAnalysis, cfg: Config) -> asyncio.Future:
        return self.fixes.want(fix_key(finding), self._fix_job(finding, ma, cfg))

    def fixes_later(self, finding: Finding, ma: ModuleAnalysis, cfg: Config) -> None:
        if finding.fixes or finding.code == "CH001" or rewrites() is None:
            return
        self.fixes.later(fix_key(finding), self._fix_job(finding, ma, cfg))

    def shutdown(self) -> None:
        self.formulas.shutdown()
        self.fixes.shutdown()
        self.hover_pool.shutdown(wait=False, cancel_futures=True)
        from condhint.budget import WORKER

        WORKER.close()  # kills the process at once, which also ends a job in progress
