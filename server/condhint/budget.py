"""Running work that cannot be interrupted cooperatively (sympy) under a wall-time budget.

In the main thread a timer signal interrupts the work; elsewhere (the language server's threads) the work
runs in a worker process that is killed and replaced when it overruns.
"""
from __future__ import annotations

import multiprocessing as mp
import signal
import threading
from typing import Any, Callable


class OverBudget(Exception):
    """The work did not finish within its budget."""


def _alarm(signum: int, frame: Any) -> None:
    raise OverBudget


def _in_main_thread() -> Callable[..., Any] | None:
    return None if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "setitimer") \
        else signal.setitimer


def run_with_budget(fn: Callable[..., Any], args: tuple, seconds: float) -> Any:
    if _in_main_thread() is not None:
        old = signal.signal(signal.SIGALRM, _alarm)
        signal.setitimer(signal.ITIMER_REAL, seconds)
        try:
            return fn(*args)
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    return WORKER.run(fn, args, seconds)


def _warm_up() -> bool:
    import importlib

    importlib.import_module("sympy")  # the symbolic jobs need it loaded
    return True


def _serve(conn: Any) -> None:
    while True:
        try:
            fn, args = conn.recv()
        except (EOFError, OSError):
            return  # the parent went away
        try:
            result = (True, fn(*args))
        except Exception as exc:  # the caller decides; the worker keeps serving
            result = (False, repr(exc))
        try:
            conn.send(result)
        except (BrokenPipeError, EOFError, OSError):
            return


class Worker:
    """One lazily started worker process; killed and restarted when a job overruns."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._proc: Any = None
        self._conn: Any = None

    def _start(self) -> None:
        ctx = mp.get_context("spawn")
        parent, child = ctx.Pipe()
        proc = ctx.Process(target=_serve, args=(child,), daemon=True, name="condhint-worker")
        proc.start()  # published once started: close() may run at any moment from another thread
        self._proc, self._conn = proc, parent
        # Start-up and imports are not the job's time: warm the worker up outside any budget.
        try:
            parent.send((_warm_up, ()))
            ok = parent.poll(120) and parent.recv()[0]
        except (EOFError, OSError):  # closed meanwhile
            ok = False
        if not ok:
            proc.kill()
            if self._proc is proc:
                self._proc = None
            raise OverBudget

    def run(self, fn: Callable[..., Any], args: tuple, seconds: float) -> Any:
        with self._lock:
            if self._proc is None or not self._proc.is_alive():
                self._start()
            try:
                self._conn.send((fn, args))
                done = self._conn.poll(seconds)
            except (BrokenPipeError, EOFError, OSError):
                self._proc = None
                raise OverBudget from None
            if not done:
                self._proc.kill()
                self._proc.join(1)
                self._proc = None
                raise OverBudget
            try:
                ok, value = self._conn.recv()
            except (EOFError, OSError):
                self._proc = None
                raise OverBudget from None
        if not ok:
            raise RuntimeError(value)
        return value

    def close(self) -> None:
        """Kill the worker at once, even while a job runs (its caller then sees OverBudget or an error)."""
        proc = self._proc
        if proc is not None:
            proc.kill()
            proc.join(1)
        self._proc = None


WORKER = Worker()
