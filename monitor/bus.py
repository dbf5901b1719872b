"""The run's event bus: each sink subscribes to the streams it needs (frames, rejections, alarm events, source status)."""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from typing import Callable, Generic, TypeVar

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame

__all__ = ["EventBus", "Topic"]

T = TypeVar("T")


@dataclass(eq=False)
class Topic(Generic[T]):
    """One stream of the bus: its listeners, called in the order they subscribed."""

    name: str
    bus: "EventBus"
    listeners: list[Callable[[T], None]] = field(default_factory=list)

    def subscribe(self, listener: Callable[[T], None]) -> None:
        self.listeners.append(listener)

    def publish(self, item: T) -> None:
        for listener in list(self.listeners):
            try:
                listener(item)
            except Exception as exc:  # noqa: BLE001 - a failing sink must not stop the run
                self.bus.failed(f"{_owner(listener)}.{self.name}: {exc!r}")


class EventBus:
    """Frames, rejections, alarm events and source status changes, each to its subscribers.

    ``attach(sink)`` subscribes a sink to each stream it has a handler for (``on_frame``,
    ``on_rejections``, ``on_alarm``, ``on_status``) and to ``close``; a sink that wants fewer
    subscribes to the topics directly. A listener that raises is counted (``errors``) and said once
    on stderr; the others still hear the event."""

    def __init__(self) -> None:
        self.frames: Topic[Frame] = Topic("on_frame", self)
        self.rejections: Topic[list[Rejection]] = Topic("on_rejections", self)
        self.alarms: Topic[AlarmEvent] = Topic("on_alarm", self)
        self.statuses: Topic[SourceStatus] = Topic("on_status", self)
        self._closers: list[Callable[[], None]] = []
        self.sinks: list[object] = []
        self.errors = 0
        self.last_error: str | None = None

    def attach(self, sink: object) -> None:
        self.sinks.append(sink)
        for topic in (self.frames, self.rejections, self.alarms, self.statuses):
            handler = getattr(sink, topic.name, None)
            if callable(handler):
                topic.subscribe(handler)
        close = getattr(sink, "close", None)
        if callable(close):
            self._closers.append(close)

    def close(self) -> None:
        """Close every attached sink (the failure of one does not stop the others)."""
        for close in self._closers:
            try:
                close()
            except Exception as exc:  # noqa: BLE001 - closing must reach every sink
                self.failed(f"{_owner(close)}.close: {exc!r}")

    def failed(self, text: str) -> None:
        self.errors += 1
        if self.last_error is None:
            print(f"regime: sink error (further ones only counted): {text}", file=sys.stderr)
        self.last_error = text


def _owner(fn: Callable[..., object]) -> str:
    owner = getattr(fn, "__self__", None)
    return type(owner).__name__ if owner is not None else getattr(fn, "__qualname__", "listener")
