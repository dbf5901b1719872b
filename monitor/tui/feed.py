"""What feeds the screen: a Session run in a worker thread (or one fixed snapshot), the alarm events it saw, and operator actions."""

from __future__ import annotations

import collections
import threading
import time
from typing import Any, Callable, Protocol

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame
from monitor.snapshot import Snapshot

__all__ = ["Feed", "EventTap", "SessionFeed", "FixedFeed", "REPLAY_ACTIONS"]

# Replay controls the session forwards to its source; each is optional.
REPLAY_ACTIONS = ("pause", "resume", "step", "seek", "set_speed")


class EventTap:
    """A Sink that keeps the last alarm events and source status changes for the journal screen.

    Thread-safe: the session thread writes, the screen's timer reads.
    """

    def __init__(self, keep: int = 5000) -> None:
        self._lock = threading.Lock()
        self._events: collections.deque[AlarmEvent] = collections.deque(maxlen=keep)
        self._statuses: collections.deque[SourceStatus] = collections.deque(maxlen=200)
        self.total = 0

    def on_frame(self, frame: Frame) -> None:
        return None

    def on_rejections(self, rejections: list[Rejection]) -> None:
        return None

    def on_alarm(self, event: AlarmEvent) -> None:
        with self._lock:
            self._events.append(event)
            self.total += 1

    def on_status(self, status: SourceStatus) -> None:
        with self._lock:
            self._statuses.append(status)

    def close(self) -> None:
        return None

    def events(self) -> list[AlarmEvent]:
        with self._lock:
            return list(self._events)

    def newer_than(self, seen: int) -> tuple[list[AlarmEvent], int]:
        """Events after the first ``seen`` ever received (those still kept), and the total so far."""
        with self._lock:
            new = min(self.total - seen, len(self._events))
            return (list(self._events)[len(self._events) - new:] if new > 0 else []), self.total


class Feed(Protocol):
    """What the screen asks of its data: the latest snapshot, the journal, the actions."""

    tap: EventTap
    error: str | None

    def run(self, stop: threading.Event) -> None: ...

    def snapshot(self) -> Snapshot | None: ...

    def act(self, action: str, *args: Any) -> str: ...


class SessionFeed:
    """Drives a monitor.session.Session: ``run`` is the worker thread's body."""

    def __init__(self, session: Any, tap: EventTap, *, clock: Callable[[], float] = time.time) -> None:
        self.session = session
        self.tap = tap
        self.error: str | None = None
        self.finished = threading.Event()
        self.thread_id: int | None = None
        self._clock = clock

    def run(self, stop: threading.Event) -> None:
        self.thread_id = threading.get_native_id()
        try:
            self.session.run(stop=stop)
        except Exception as exc:  # a broken source is a visible status, never a crash
            self.error = f"{type(exc).__name__}: {exc}"
        finally:
            self.finished.set()

    def snapshot(self) -> Snapshot | None:
        try:
            return self.session.snapshot()
        except Exception as exc:
            self.error = f"{type(exc).__name__}: {exc}"
            return None

    def act(self, action: str, *args: Any) -> str:
        """Call the session's ``action``; a short message for the operator either way."""
        method = getattr(self.session, action, None)
        if method is None:
            return f"{action.replace('_', ' ')}: not available for this source"
        if action in ("acknowledge", "shelve", "unshelve", "reset"):
            try:
                method(*args)
            except (KeyError, ValueError) as exc:
                return f"{action}: {exc}"
            return ""
        try:
            method(*args)
        except (AttributeError, NotImplementedError, TypeError) as exc:
            return f"{action.replace('_', ' ')}: not available ({exc})"
        return ""


class FixedFeed:
    """One fixed snapshot (tests, layout previews): actions are recorded, never applied."""

    def __init__(self, snapshot: Snapshot | None, tap: EventTap | None = None) -> None:
        self._snapshot = snapshot
        self.tap = tap or EventTap()
        self.error: str | None = None
        self.actions: list[tuple[str, tuple[Any, ...]]] = []

    def run(self, stop: threading.Event) -> None:
        stop.wait()

    def snapshot(self) -> Snapshot | None:
        return self._snapshot

    def act(self, action: str, *args: Any) -> str:
        self.actions.append((action, args))
        return ""
