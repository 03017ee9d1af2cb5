"""Progress on stderr for commands that can take more than about two seconds.

``working`` shows a spinner with what is happening (loading the physics libraries, building a
dossier); ``counted`` a bar for a known number of steps. Both draw only on a terminal, so piped
output and tests stay clean; rich is imported only when a command needs it.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any


def _console() -> Any:
    from rich.console import Console

    return Console(stderr=True)


@contextmanager
def working(message: str) -> Iterator[Callable[[str], None]]:
    """A spinner showing ``message``; yields a function that changes the message."""
    if not sys.stderr.isatty():
        yield lambda _text: None
        return
    console = _console()
    with console.status(message) as status:
        yield lambda text: status.update(text)


@contextmanager
def counted(label: str, total: int) -> Iterator[Callable[..., None]]:
    """A progress bar; yields ``advance(steps, total=None)`` (``total`` when learnt late)."""
    if not sys.stderr.isatty():
        yield lambda _steps, _total=None: None
        return
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    columns = ("[progress.description]{task.description}", BarColumn(), MofNCompleteColumn())
    with Progress(*columns, TimeElapsedColumn(), console=_console(), transient=True) as bar:
        line = bar.add_task(label, total=total or None)

        def advance(steps: int, new_total: int | None = None) -> None:
            if new_total is not None:
                bar.update(line, total=new_total)
            bar.advance(line, steps)

        yield advance
