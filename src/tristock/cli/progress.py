"""Progress on stderr while work that may take over a second runs.

Shown only when stderr is a terminal and ``--quiet`` was not given: a spinner, what is being
done and the time elapsed, drawn by rich (a dependency for this) and erased when the work
ends, so nothing of it stays on the screen or reaches a pipe or a file. rich is imported only
when a terminal will show it.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from typing import IO


def shows_progress(stream: IO[str], quiet: bool) -> bool:
    """Whether progress goes to ``stream``: a terminal, not ``--quiet``, and TERM not
    "dumb"."""
    if quiet or os.environ.get("TERM") == "dumb":
        return False
    try:
        return stream.isatty()
    except (AttributeError, ValueError):  # a closed or replaced stream
        return False


@contextmanager
def progress(what: str, *, quiet: bool = False) -> Iterator[None]:
    """Show ``what`` with a spinner and the elapsed time on stderr while the block runs."""
    stream = sys.stderr
    if not shows_progress(stream, quiet):
        yield
        return
    from rich.console import Console
    from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

    console = Console(file=stream)
    columns = (SpinnerColumn(), TextColumn("{task.description}"), TimeElapsedColumn())
    with Progress(*columns, console=console, transient=True) as bar:
        bar.add_task(what, total=None)
        yield


__all__ = ["progress", "shows_progress"]
