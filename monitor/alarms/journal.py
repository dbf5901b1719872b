"""The alarm journal: one JSON line per transition and per operator action, flushed as written."""

from __future__ import annotations

import json
import threading
from pathlib import Path
from typing import Any, Callable, IO

from monitor.alarms.events import AlarmEvent
from monitor.alarms.listener import AlarmOnlySink

__all__ = ["JournalSink", "event_line", "read_journal"]


def event_line(event: AlarmEvent) -> str:
    """The journal line of one event (the ``{"type": "alarm", ...}`` contract), without newline."""
    return json.dumps(event.to_json(), allow_nan=False, separators=(", ", ": "))


def read_journal(path: str | Path) -> list[dict[str, Any]]:
    """Every event of a journal file, in order (a torn last line is skipped)."""
    out: list[dict[str, Any]] = []
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            line = line.strip()
            if not line:
                continue
            try:
                out.append(json.loads(line))
            except json.JSONDecodeError:
                continue
    return out


class JournalSink(AlarmOnlySink):
    """A Sink that appends AlarmEvent.to_json() lines to ``path``.

    It never raises for its own I/O trouble: a failed write is counted in
    ``errors`` and kept in ``last_error``, and writing resumes when it can.
    With ``warn`` (a callable taking one line of text) the trouble is also said
    aloud: the first failure of a run of failures, the return to writing after
    one, and at ``close`` how many events did not reach the file. Each line is
    flushed as written, so a crash of the process loses no written event.
    """

    def __init__(self, path: str | Path, *, append: bool = True,
                 warn: Callable[[str], None] | None = None) -> None:
        self.path = Path(path)
        self.errors = 0                 # failed writes and a failed close
        self.failed = 0                 # events that did not reach the file
        self.written = 0
        self._held = 0                  # events in the write buffer whose flush failed: written late, or lost at close
        self.last_error: str | None = None
        self._warn = warn
        self._failing = 0               # failures since the last successful write
        self._lock = threading.Lock()
        self._fh: IO[str] | None = None
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._fh = open(self.path, "a" if append else "w", encoding="utf-8")

    def on_alarm(self, event: AlarmEvent) -> None:
        with self._lock:
            try:
                if self._fh is None or self._fh.closed:
                    self._fh = open(self.path, "a", encoding="utf-8")
                self._fh.write(event_line(event) + "\n")
            except (OSError, ValueError) as exc:
                self.failed += 1                     # not even in the buffer: this event is lost
                self._trouble(exc)
                return
            try:
                self._fh.flush()
            except (OSError, ValueError) as exc:
                self._held += 1                      # kept in the buffer, written by the next flush that works
                self._trouble(exc)
                return
            self.written += 1 + self._held
            if self._failing:
                late = f", {self._held} of them written late from the buffer" if self._held else ""
                self._say(f"journal {self.path}: writing again after {self._failing} failed write(s){late}")
                self._failing = 0
            self._held = 0

    def _trouble(self, exc: BaseException) -> None:
        self.errors += 1
        self.last_error = f"{type(exc).__name__}: {exc}"
        self._failing += 1
        if self._failing == 1:
            self._say(f"journal {self.path}: cannot write an event ({self.last_error}); "
                      "events are counted and writing is retried with the next one")

    def _say(self, text: str) -> None:
        if self._warn is not None:
            try:
                self._warn(text)
            except Exception:  # noqa: BLE001 - a broken warning channel must not stop the journal
                pass

    def close(self) -> None:
        with self._lock:
            if self._fh is not None and not self._fh.closed:
                try:
                    self._fh.close()                 # flushes what the buffer still holds
                    self.written += self._held
                except OSError as exc:
                    self.errors += 1
                    self.failed += self._held
                    self.last_error = str(exc)
                self._held = 0
            if self.failed:
                self._say(f"journal {self.path}: {self.failed} event(s) not written; "
                          f"last error: {self.last_error}")
