"""Scheduling analyses: debounced per document, run off the event loop, stale work abandoned.

An analysis belongs to one generation of a document (bumped on every change and settings change). It runs
on the analysis thread; between top-level definitions it checks whether a newer generation arrived and
gives up if so. Results are published (or kept for pull requests) only if they are still current.
"""
from __future__ import annotations

import asyncio
import gc
import logging
import time
import uuid
from concurrent.futures import ThreadPoolExecutor
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING

from lsprotocol import types

from condhint.engine import DEFAULT_CACHE, Abandoned, ModuleAnalysis, UnitCache, analyse_module
from condhint.expr import topological
from condhint.lsp.convert import Positions, to_lsp_diagnostic
from condhint.lsp.state import DocumentState, relative_to

if TYPE_CHECKING:
    from condhint.lsp.server import CondhintServer

log = logging.getLogger(__name__)

PROGRESS_AFTER = 0.3  # seconds: shorter analyses show no progress
PROGRESS_EVERY = 0.25
COLLECT_AFTER = 3.0  # seconds without analyses before the cyclic garbage collector runs in full
GARBAGE_SHARE = 0.25  # objects frozen between full collections, as a share of those the last one kept


class Analyser:
    def __init__(self, ls: "CondhintServer") -> None:
        self.ls = ls
        self.pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="condhint-analysis")
        self.units = UnitCache()
        self._failed: set[str] = set()
        self._collect: asyncio.TimerHandle | None = None
        self._kept = 0  # objects the last full collection kept (then froze)
        self._frozen_since = 0  # objects frozen after each analysis since then

    # ---- scheduling ---------------------------------------------------------------------------------------
    def schedule(self, state: DocumentState, delay: float | None = None) -> None:
        """(Re)start the analysis of the document's current text after `delay` (default: the debounce)."""
        if state.closed:
            return
        if state.pending is not None:
            state.pending.cancel()
        loop = asyncio.get_running_loop()
        if state.ready is None or state.ready.done():
            state.ready = loop.create_future()
        wait = self.ls.settings.debounce if delay is None else delay
        self.ls.background.idle.clear()  # background jobs wait for the analysis
        state.pending = loop.create_task(self._run(state, state.generation, wait))
        state.pending.add_done_callback(lambda _: self._maybe_idle())

    def _maybe_idle(self) -> None:
        if all(s.pending is None or s.pending.done() for s in self.ls.docs):
            self.ls.background.idle.set()

    async def result(self, state: DocumentState, timeout: float = 10.0) -> ModuleAnalysis | None:
        """The analysis of the document's current text: waits for it (starting it at once if nothing is
        scheduled); None after `timeout` seconds."""
        loop = asyncio.get_running_loop()
        end = loop.time() + timeout
        while not state.closed:
            if state.current:
                return state.result
            if state.pending is None or state.pending.done():
                self.schedule(state, 0.0)
            fut = state.ready
            assert fut is not None
            try:
                return await asyncio.wait_for(asyncio.shield(fut), max(end - loop.time(), 0.0))
            except asyncio.TimeoutError:
                return None
            except asyncio.CancelledError:
                task = asyncio.current_task()
                if task is not None and task.cancelling():
                    raise  # this request was cancelled
                # a newer version arrived while waiting: wait for that one
        return None

    async def _run(self, state: DocumentState, generation: int, delay: float) -> None:
        if delay > 0:
            await asyncio.sleep(delay)
        if state.generation != generation or state.closed:
            return
        ls = self.ls
        cfg = ls.settings.analysis_config.for_path(relative_to(state.path, ls.root))
        text, lines, version = state.text, state.lines, state.version

        def abandoned() -> bool:
            return state.generation != generation or state.closed

        def progress(done: int, total: int) -> None:
            state.progress = (done, total)

        state.progress = (0, 0)
        job = partial(analyse_module, text, state.path, cfg, DEFAULT_CACHE, units=self.units, tolerant=True,
                      abandoned=abandoned, progress=progress)
        fut = asyncio.get_running_loop().run_in_executor(self.pool, job)
        try:
            result = await self._with_progress(state, fut)
        except Abandoned:
            return
        except Exception as exc:  # noqa: BLE001 - the server keeps running; one message per kind of failure
            log.exception("analysis of %s failed", state.uri)
            kind = type(exc).__name__
            if kind not in self._failed:
                self._failed.add(kind)
                ls.tell(f"condhint could not analyse {Path(state.path).name}: {kind}: {exc}", error=True)
            if state.generation == generation and state.ready is not None and not state.ready.done():
                state.ready.set_result(None)  # waiters get no result now, rather than after their timeout
            return
        if state.generation != generation or state.closed:
            return  # never publish results computed for an older version
        if result.index is not None:
            result.index.release()  # parsed again if a fix needs it: each version's tree is not kept
        state.result, state.result_version, state.result_lines = result, generation, lines
        state.result_doc_version = version
        state.diagnostics = None
        log.info("analysed %s v%s: %d findings, %d units analysed, %d reused, %d expressions, %.3f s",
                 Path(state.path).name, version, len(result.findings), result.analysed, result.reused,
                 result.site_misses, result.seconds)
        if state.ready is not None and not state.ready.done():
            state.ready.set_result(result)
        if not ls.pull:
            self.publish(state)
        self.enrich(state, cfg)
        self._keep_gc_off_the_path()

    # ---- garbage collection ---------------------------------------------------------------------------------
    def _keep_gc_off_the_path(self) -> None:
        """The caches hold millions of objects; a full collection in the middle of an edit's analysis costs
        tens of milliseconds. Freeze what exists now (collections skip it), and collect in full once the
        user has paused. Frozen objects include the analysis's garbage cycles, so a user who never pauses
        gets a full collection here, between analyses, once the objects frozen since the last one reach a
        quarter of those it kept (CPython's own rule for its oldest generation): memory stays bounded.
        Counting the young generations costs what the analysis allocated; counting frozen objects
        (`gc.get_freeze_count`) walks all of them, so that is done only after a full collection."""
        young = sum(len(gc.get_objects(generation)) for generation in range(3))
        gc.freeze()
        if self._collect is not None:
            self._collect.cancel()
            self._collect = None
        if self._kept:
            self._frozen_since += young
        else:
            self._kept = gc.get_freeze_count()  # the first analysis sets the base
        if self._frozen_since > GARBAGE_SHARE * self._kept:
            self._collect_in_full()
        else:
            self._collect = asyncio.get_running_loop().call_later(COLLECT_AFTER, self._collect_when_idle)

    def _collect_when_idle(self) -> None:
        self._collect = None
        if any(s.pending is not None and not s.pending.done() for s in self.ls.docs):
            self._collect = asyncio.get_running_loop().call_later(COLLECT_AFTER, self._collect_when_idle)
            return
        self._collect_in_full()

    def _collect_in_full(self) -> None:
        t0 = time.perf_counter()
        gc.unfreeze()
        freed = gc.collect()
        gc.freeze()
        self._kept, self._frozen_since = gc.get_freeze_count(), 0
        log.info("full garbage collection: %d objects freed, %d kept, %.0f ms", freed, self._kept,
                 1000 * (time.perf_counter() - t0))

    async def _with_progress(self, state: DocumentState, fut: asyncio.Future) -> ModuleAnalysis:
        done, _ = await asyncio.wait({fut}, timeout=PROGRESS_AFTER)
        if done or not self.ls.can_report_progress:
            return await fut
        token = f"condhint-{uuid.uuid4()}"
        progress = self.ls.work_done_progress
        try:
            await asyncio.wait_for(progress.create_async(token), 2.0)
        except Exception:  # noqa: BLE001 - a client that refuses progress still gets diagnostics
            return await fut
        name = Path(state.path).name
        progress.begin(token, types.WorkDoneProgressBegin(title="condhint", message=f"analysing {name}",
                                                          percentage=0, cancellable=False))
        try:
            while True:
                done, _ = await asyncio.wait({fut}, timeout=PROGRESS_EVERY)
                if done:
                    return fut.result()
                d, t = state.progress
                progress.report(token, types.WorkDoneProgressReport(
                    message=f"{name}: {d} of {t} parts", percentage=int(100 * d / t) if t else 0))
        finally:
            progress.end(token, types.WorkDoneProgressEnd(message=f"{name} analysed"))

    # ---- results ------------------------------------------------------------------------------------------
    def diagnostics(self, state: DocumentState) -> list[types.Diagnostic]:
        if state.result is None:
            return []
        if state.diagnostics is None:
            pos = Positions(state.result_lines, self.ls.codec)
            state.diagnostics = [to_lsp_diagnostic(f, pos, state.uri, self.ls.related_information)
                                 for f in state.result.findings]
        return state.diagnostics

    def publish(self, state: DocumentState) -> None:
        self.ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(
            uri=state.uri, diagnostics=self.diagnostics(state), version=state.result_doc_version))

    def clear(self, uri: str) -> None:
        self.ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=uri, diagnostics=[]))

    def enrich(self, state: DocumentState, cfg) -> None:  # noqa: ANN001 - condhint.config.Config
        """Queue the κ formulas and rewrite searches of the findings, for hover and code actions."""
        bg = self.ls.background
        bg.formulas.forget_queue()
        bg.fixes.forget_queue()
        formulas = self.ls.settings.config.kappa_formula
        fixes = self.ls.settings.config.fixes
        assert state.result is not None
        result = state.result
        for f in result.findings:
            site = result.site_of(f)
            if site is None:
                continue
            if formulas:
                node = next((n for n in topological(site.root) if n.span == f.span), site.root)
                bg.formula_later(site, node, cfg)
            if fixes:
                bg.fixes_later(f, result, cfg)

    def shutdown(self) -> None:
        self.pool.shutdown(wait=False, cancel_futures=True)
