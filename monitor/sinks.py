"""The sink protocol: what the session hands to the screen, the recorder, the journal and the printers."""

from __future__ import annotations

from typing import Protocol

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.alarms.listener import AlarmOnlySink
from monitor.model import Frame

__all__ = ["Sink", "AlarmOnlySink"]



class Sink(Protocol):
    """Every method must return quickly and must not raise for its own I/O
    trouble: a sink that cannot write reports that through its own status
    (the recorder raises a data-quality alarm), never by stopping the session."""

    def on_frame(self, frame: Frame) -> None: ...

    def on_rejections(self, rejections: list[Rejection]) -> None: ...

    def on_alarm(self, event: AlarmEvent) -> None: ...

    def on_status(self, status: SourceStatus) -> None: ...

    def close(self) -> None: ...
