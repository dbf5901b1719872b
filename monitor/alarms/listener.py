"""The base of the sinks that care only about alarm events (journal, publisher, hooks)."""

from __future__ import annotations

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame

__all__ = ["AlarmOnlySink"]


class AlarmOnlySink:
    """Base of the sinks that care only about alarm events (journal, publisher, hooks):
    frames, rejections and status changes are accepted and ignored."""

    def on_frame(self, frame: Frame) -> None:
        return None

    def on_rejections(self, rejections: list[Rejection]) -> None:
        return None

    def on_status(self, status: SourceStatus) -> None:
        return None

    def on_alarm(self, event: AlarmEvent) -> None:
        raise NotImplementedError

    def close(self) -> None:
        return None
