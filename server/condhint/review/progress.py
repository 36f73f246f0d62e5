"""A progress bar on stderr while files are analysed, only when stderr is a terminal (rich, if installed)."""
from __future__ import annotations

import sys
from contextlib import contextmanager
from typing import Callable, Iterator


def wanted(total: int) -> bool:
    return total > 1 and sys.stderr.isatty()


@contextmanager
def progress(total: int, enabled: bool | None = None) -> Iterator[Callable[[], None]]:
    """Yields `advance()`, to be called once per finished file; does nothing when not shown."""
    if enabled is None:
        enabled = wanted(total)
    if not enabled:
        yield lambda: None
        return
    try:
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn
        from rich.console import Console
    except ImportError:
        yield lambda: None
        return
    bar = Progress(TextColumn("condhint"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                   console=Console(file=sys.stderr), transient=True)
    with bar:
        task = bar.add_task("files", total=total)
        yield lambda: bar.advance(task)
