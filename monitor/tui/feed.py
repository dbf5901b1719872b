"""What feeds the screen: a Session run in a worker thread (or one fixed snapshot), the alarm events it saw, and operator actions."""

from __future__ import annotations

import collections
import math
import threading
import time
from dataclasses import dataclass
from typing import Any, Callable, Mapping, Protocol

from adapters.base import LinkState, SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent, AlarmState
from monitor.model import Frame
from monitor.snapshot import AlarmView, Snapshot
from monitor.operator import Command, command_name

__all__ = ["Feed", "EventTap", "SessionFeed", "FixedFeed", "REPLAY_ACTIONS", "Quality", "SourceView",
           "discharge_state", "value_quality", "data_clock", "source_view", "stale_sources", "trip_value", "awaiting_reset"]

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

    def act(self, command: Command) -> str: ...


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

    def act(self, command: Command) -> str:
        """Apply ``command`` to the session; a short message for the operator (empty when it was applied)."""
        what = command_name(command)
        try:
            result = self.session.apply(command)
        except (KeyError, ValueError) as exc:          # an unknown alarm id (UnknownAlarm), a refused value
            return f"{what}: {exc}"
        if result is False:
            return f"{what}: not available for this source"
        return ""


class FixedFeed:
    """One fixed snapshot (tests, layout previews): actions are recorded, never applied."""

    def __init__(self, snapshot: Snapshot | None, tap: EventTap | None = None) -> None:
        self._snapshot = snapshot
        self.tap = tap or EventTap()
        self.error: str | None = None
        self.actions: list[Command] = []

    def run(self, stop: threading.Event) -> None:
        stop.wait()

    def snapshot(self) -> Snapshot | None:
        return self._snapshot

    def act(self, command: Command) -> str:
        self.actions.append(command)
        return ""


# -- the truth of each value, source and alarm, as the screen shows it ----------------------------------------

@dataclass(frozen=True)
class Quality:
    """The quality of one value as shown: ``fresh``, ``stale`` (with its age) or ``no data``."""

    state: str
    age: float | None = None        # seconds since its source's last reading, never negative
    source: str | None = None

    @property
    def stale(self) -> bool:
        return self.state == "stale"

    @property
    def fresh(self) -> bool:
        return self.state == "fresh"


@dataclass(frozen=True)
class SourceView:
    """One source in exactly one state: connecting, connected, stale, disconnected, ended or failed."""

    name: str
    state: str
    age: float | None               # seconds since its last reading (wall clock), never negative
    message: str = ""
    retries: int = 0


def _age(snap: Snapshot, name: str, now: float) -> float | None:
    counts = snap.counts.get(name)
    if counts is None or counts.last_wall_time is None:
        return None
    return max(0.0, now - counts.last_wall_time)


def _stale_alarm_active(snap: Snapshot, source: str | None = None) -> bool:
    """A stale-data alarm (the engine's, data time) is active, for ``source`` or for any source: its
    condition holds (unacknowledged or acknowledged; returned-unacknowledged means it has cleared)."""
    for a in snap.alarms:
        if a.kind == "stale" and a.state in (AlarmState.UNACKNOWLEDGED, AlarmState.ACKNOWLEDGED):
            if source is None or source in a.alarm:
                return True
    return False


def source_view(snap: Snapshot, name: str, now: float, stale_after: float) -> SourceView:
    """The source's one state. A broken or ended link wins; a link that is up but silent for longer than
    ``stale_after`` (live, wall clock) or whose stale alarm is active is ``stale``, never also ``connected``."""
    status = snap.sources.get(name)
    age = _age(snap, name, now)
    carried = snap.source_states.get(name)          # the session's one state, as the headless lines say it
    if carried is not None:
        state = carried
    elif status is not None and status.state in (LinkState.DISCONNECTED, LinkState.FAILED, LinkState.ENDED):
        state = status.state.value
    elif _stale_alarm_active(snap, name) or (snap.live and status is not None and status.state != LinkState.CONNECTING
                                             and (age is None or age > stale_after)):
        state = "stale"
    elif status is None:
        state = "connecting" if age is None else "connected"
    else:
        state = status.state.value
    message = status.message if status is not None else ""
    if state == "stale" and message.startswith("connected"):
        message = ""                 # a stale source is not also "connected"
    return SourceView(name, state, age, message, status.retries if status is not None else 0)


def stale_sources(snap: Snapshot, now: float, stale_after: float) -> list[SourceView]:
    """The sources whose data are stale now."""
    names = sorted(set(snap.sources) | set(snap.counts))
    return [v for v in (source_view(snap, n, now, stale_after) for n in names) if v.state == "stale"]


def value_quality(snap: Snapshot, name: str, now: float, stale_after: float) -> Quality:
    """``name``'s quality: no data (absent or NaN), stale (every source that sent data is stale, or the
    session says so) or fresh."""
    value = snap.latest.get(name, (float("nan"), None))[0]
    if value is None or not math.isfinite(value):
        return Quality("no data")
    names = sorted(set(snap.sources) | set(snap.counts))
    views = [source_view(snap, n, now, stale_after) for n in names]
    feeding = [v for v in views if v.age is not None or v.state == "stale"]
    if feeding and all(v.state in ("stale", "disconnected", "failed") for v in feeding):
        youngest = min((v for v in feeding), key=lambda v: v.age if v.age is not None else math.inf)
        return Quality("stale", youngest.age, youngest.name)
    return Quality("fresh")


def discharge_state(snap: Snapshot, now: float, stale_after: float) -> str:
    """``on``, ``off`` or ``unknown`` (no fresh density to judge it by)."""
    if not snap.discharge_known or not value_quality(snap, "ne", now, stale_after).fresh:
        return "unknown"
    return "on" if snap.discharge_on else "off"


def data_clock(snap: Snapshot) -> float | None:
    """The data time to show and to age alarms by: the snapshot's, or in a replay just after a seek
    (before the first reading there) the replay position, so the clock never goes blank."""
    if snap.data_time is not None:
        return snap.data_time
    return snap.replay.time if snap.replay is not None else None


def trip_value(a: AlarmView) -> tuple[float | None, str]:
    """(value, what it is): the value that tripped the alarm, else (an alarm never raised, or one without a
    value: stale, quality) the value at its last transition (labelled so)."""
    if a.trip_value is not None:
        return a.trip_value, "tripped at"
    return a.value, "at change"


def awaiting_reset(a: AlarmView) -> bool:
    """A latched alarm that has returned and waits for the operator's reset."""
    return a.awaiting_reset
