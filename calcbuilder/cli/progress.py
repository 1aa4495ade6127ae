"""A terminal progress bar with an ETA, usable as a statistics progress callback.

The statistics core reports ``progress(done, total)`` and cancels when the
callback returns ``False``; :func:`progress_bar` yields such a callback drawing
a rich bar (description, bar, done/total, elapsed time, time remaining) on
standard error. When standard error is not a terminal (pipes, tests, CI) the
callback draws nothing. Ctrl-C raises ``KeyboardInterrupt`` inside the work as
usual; the bar is removed on the way out and the command writes nothing.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

__all__ = ["ProgressCallback", "progress_bar"]

ProgressCallback = Callable[[int, int], bool]
"""``callback(done, total) -> True`` (never cancels by itself)."""


def _silent(done: int, total: int) -> bool:
    del done, total
    return True


@contextmanager
def progress_bar(description: str, *, enabled: bool | None = None, console: Any = None
                 ) -> Iterator[ProgressCallback]:
    """Show a progress bar with ETA while the block runs.

    Parameters
    ----------
    description : str
        What is being computed, shown left of the bar.
    enabled : bool, optional
        Force the bar on or off (default: on when standard error is a terminal).
    console : rich.console.Console, optional
        Where to draw (default: standard error).

    Yields
    ------
    callable
        ``callback(done, total)`` to hand to a statistics function.
    """
    show = sys.stderr.isatty() if enabled is None else enabled
    if not show:
        yield _silent
        return
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )

    columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
               TimeElapsedColumn(), TextColumn("ETA"), TimeRemainingColumn())
    with Progress(*columns, console=console or Console(stderr=True),
                  transient=True) as bar:
        task = bar.add_task(description, total=None)

        def callback(done: int, total: int) -> bool:
            bar.update(task, completed=done, total=total)
            return True

        yield callback
