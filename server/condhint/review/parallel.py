"""Analysing many files in worker processes, with results in the order of the inputs."""
from __future__ import annotations

import multiprocessing as mp
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from typing import Callable, Sequence, TypeVar

T = TypeVar("T")
R = TypeVar("R")


def default_jobs() -> int:
    """The machine's cores available to this process."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _context() -> mp.context.BaseContext:
    # fork starts workers with condhint already imported (fast); spawn elsewhere.
    methods = mp.get_all_start_methods()
    return mp.get_context("fork" if "fork" in methods else "spawn")


def map_ordered(fn: Callable[[T], R], items: Sequence[T], jobs: int,
                done: Callable[[int], None] | None = None) -> list[R]:
    """`[fn(x) for x in items]` on up to `jobs` processes; `done(i)` is called as each item finishes.

    `fn` must be a module-level function and items and results picklable. With one job, or one item,
    everything runs in this process.
    """
    jobs = max(1, min(jobs, len(items)))
    if jobs == 1:
        out = []
        for i, item in enumerate(items):
            out.append(fn(item))
            if done:
                done(i)
        return out
    results: list[R | None] = [None] * len(items)
    with ProcessPoolExecutor(max_workers=jobs, mp_context=_context()) as pool:
        futures = {pool.submit(fn, item): i for i, item in enumerate(items)}
        for fut in as_completed(futures):
            i = futures[fut]
            results[i] = fut.result()
            if done:
                done(i)
    return results  # type: ignore[return-value]
