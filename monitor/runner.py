"""The link to one source: open with backoff, poll, and the one state it is in (the run's source status)."""

from __future__ import annotations

import time
from typing import Callable

from adapters.base import FatalSourceError, LinkState, Polled, Source, SourceStatus, TransientSourceError

__all__ = ["SourceLink", "OPEN_BACKOFF"]

OPEN_BACKOFF = (0.2, 0.5, 1.0, 2.0, 5.0)     # s between attempts to open a source that failed to open


class SourceLink:
    """Opens ``source`` (a transient failure is a ``disconnected`` status, retried with backoff; a fatal
    one ends the run with ``failure``), polls it, and keeps its status. ``on_change`` hears every change
    of link state (and of retries or, when not connected, of message): the bus's status stream."""

    def __init__(self, source: Source, on_change: Callable[[SourceStatus], None]) -> None:
        self.source = source
        self._on_change = on_change
        self.status = SourceStatus(source.name, LinkState.CONNECTING)
        self.opened = False
        self.ended = False
        self.failure: str | None = None
        self._open_failures = 0
        self._next_open = 0.0

    def open(self) -> bool:
        """Open the source; a transient failure is a status and is retried by ``poll``."""
        try:
            self.source.open()
        except TransientSourceError as exc:
            self._open_failures += 1
            self._next_open = time.monotonic() + OPEN_BACKOFF[min(self._open_failures - 1, len(OPEN_BACKOFF) - 1)]
            self.set_status(SourceStatus(self.status.name, LinkState.DISCONNECTED, str(exc), self._open_failures))
            return False
        except FatalSourceError as exc:
            self.fail(str(exc))
            return False
        self.opened = True
        self.set_status(self.source_status())
        return True

    def poll(self, timeout: float) -> Polled | None:
        """One poll (opening first when due); None when there was nothing to poll (waiting to open
        again, or the link broke: its status says so)."""
        if self.ended:
            return None
        if not self.opened:
            if time.monotonic() < self._next_open:
                time.sleep(min(timeout, max(0.0, self._next_open - time.monotonic())))
                return None
            if not self.open():
                return None
        try:
            return self.source.poll(timeout)
        except TransientSourceError as exc:
            self.set_status(SourceStatus(self.status.name, LinkState.DISCONNECTED, str(exc)))
            return None
        except FatalSourceError as exc:
            self.fail(str(exc))
            return None

    def settle(self, polled: Polled) -> None:
        """Take the status a poll brought (or ask the source), ending the run when the source ended or gave up."""
        status = polled.status if polled.status is not None else self.source_status()
        self.set_status(status)
        if status.state is LinkState.ENDED:
            self.ended = True
        elif status.state is LinkState.FAILED:
            self.fail(status.message or "the source gave up")

    def source_status(self) -> SourceStatus:
        try:
            return self.source.status()
        except Exception as exc:  # noqa: BLE001 - a broken status() is shown, not raised
            return SourceStatus(self.status.name, LinkState.DISCONNECTED, f"status unavailable: {exc!r}")

    def set_status(self, status: SourceStatus) -> None:
        prev, self.status = self.status, status
        # sinks hear of link changes; a connected source's chatty message is only kept
        changed = status.state is not prev.state or (
            status.state is not LinkState.CONNECTED and status.message != prev.message)
        if changed or status.retries != prev.retries:
            self._on_change(status)

    def fail(self, message: str) -> None:
        self.failure = message
        self.ended = True
        self.set_status(SourceStatus(self.status.name, LinkState.FAILED, message))
