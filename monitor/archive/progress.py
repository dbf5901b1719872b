"""The build's progress bar on stderr (files done, readings/s, time left), drawn with rich; silent when quiet or not a terminal."""

from __future__ import annotations

import sys
import time
from typing import IO, Any

__all__ = ["ProgressBar", "wanted"]


def wanted(quiet: bool, stream: IO[str] | None = None) -> bool:
    """A bar only on a terminal and without --quiet."""
    s = sys.stderr if stream is None else stream
    return not quiet and bool(getattr(s, "isatty", lambda: False)())


class ProgressBar:
    """A context manager; call it as monitor.archive.build.Progress (done, total, readings)."""

    def __init__(self, stream: IO[str] | None = None) -> None:
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

        self._console = Console(file=stream or sys.stderr)
        self._progress = Progress(TextColumn("cataloguing"), BarColumn(), MofNCompleteColumn(),
                                  TextColumn("files  {task.fields[rate]} readings/s  left"), TimeRemainingColumn(),
                                  console=self._console, transient=True)
        self._task: Any = None
        self._t0 = time.monotonic()

    def __enter__(self) -> "ProgressBar":
        self._progress.start()
        self._t0 = time.monotonic()
        return self

    def __exit__(self, *exc: object) -> None:
        self._progress.stop()

    def refresh(self) -> None:
        """Draw now (rich otherwise redraws ten times a second)."""
        self._progress.refresh()

    def __call__(self, done: int, total: int, readings: int) -> None:
        elapsed = max(time.monotonic() - self._t0, 1e-9)
        rate = f"{readings / elapsed:,.0f}"
        if self._task is None:
            self._task = self._progress.add_task("files", total=total, rate=rate)
        self._progress.update(self._task, completed=done, total=total, rate=rate)
