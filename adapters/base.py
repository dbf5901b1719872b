"""The source protocol: what every adapter offers the pipeline (poll for batches, status, close)."""

from __future__ import annotations

import enum
from dataclasses import dataclass, field
from typing import Protocol

from adapters.batch import Batch, Rejection

__all__ = ["LinkState", "SourceStatus", "Polled", "Source", "SourceError", "TransientSourceError", "FatalSourceError"]


class LinkState(str, enum.Enum):
    """Connection state of a source as the operator sees it."""

    CONNECTING = "connecting"
    CONNECTED = "connected"
    DISCONNECTED = "disconnected"   # lost; being retried with backoff
    REFUSED = "refused"             # the peer refuses us (e.g. a failed CURVE handshake); still retried
    ENDED = "ended"                 # a file or finite simulation reached its end
    FAILED = "failed"               # gave up; see message


@dataclass(frozen=True)
class SourceStatus:
    name: str
    state: LinkState
    message: str = ""
    retries: int = 0


@dataclass(frozen=True)
class Polled:
    """What one poll of a source returned: batches, rejections, and its status now."""

    batches: list[Batch] = field(default_factory=list)
    rejections: list[Rejection] = field(default_factory=list)
    status: SourceStatus | None = None


class SourceError(Exception):
    """Root of the adapters' errors."""


class TransientSourceError(SourceError):
    """The link broke but may come back (reconnect with backoff)."""


class FatalSourceError(SourceError):
    """The source cannot work (bad address, missing file, bad key file)."""


class Source(Protocol):
    """An adapter. ``poll`` never raises for bad data or a lost link: those are
    rejections and status. It raises FatalSourceError only when the source can
    never work (and the CLI then exits 3)."""

    name: str

    def open(self) -> None: ...

    def poll(self, timeout: float) -> Polled:
        """Wait at most ``timeout`` seconds for input; return what arrived."""
        ...

    def status(self) -> SourceStatus: ...

    def close(self) -> None: ...
