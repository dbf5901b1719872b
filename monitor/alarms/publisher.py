"""ZeroMQ PUB of alarm events (the journal's JSON, one frame per event), bound to loopback by default."""

from __future__ import annotations

import threading
from typing import Any

from adapters.base import FatalSourceError
from monitor.alarms.events import AlarmEvent
from monitor.alarms.journal import event_line
from monitor.errors import UsageError
from monitor.alarms.listener import AlarmOnlySink

__all__ = ["AlarmPublisher", "PublisherBindError", "DEFAULT_ENDPOINT", "normalise_endpoint"]

DEFAULT_ENDPOINT = "tcp://127.0.0.1:5581"
_LOOPBACK = {"127.0.0.1", "localhost", "::1", "[::1]"}


class PublisherBindError(FatalSourceError, UsageError):
    """The publisher's address is valid but cannot be bound (in use, no such ipc directory): the CLI
    exits 3, as ``regime simulate`` does for the same address. It is also a UsageError, so a caller that
    cleans up on refused outputs (build_outputs) treats it like any other output that cannot be made."""


def normalise_endpoint(endpoint: str | None, *, allow_remote: bool = False) -> str:
    """``5581`` or ``:5581`` -> tcp://127.0.0.1:5581; ipc:// as given; a non-loopback tcp host needs allow_remote."""
    if not endpoint:
        return DEFAULT_ENDPOINT
    ep = endpoint.strip()
    if ep.lstrip(":").isdigit():
        return f"tcp://127.0.0.1:{ep.lstrip(':')}"
    if ep.startswith(("ipc://", "inproc://")):
        return ep
    if not ep.startswith("tcp://"):
        raise UsageError(f"alarm publisher endpoint {endpoint!r}: use tcp://127.0.0.1:PORT, PORT or ipc://PATH")
    host = ep[len("tcp://"):].rsplit(":", 1)[0]
    if host not in _LOOPBACK and not allow_remote:
        raise UsageError(f"alarm publisher endpoint {endpoint!r} is not loopback; binding beyond this machine "
                         "must be asked for explicitly (--allow-remote, or [sources] allow_remote = true)")
    return ep


class AlarmPublisher(AlarmOnlySink):
    """A Sink publishing each event as one UTF-8 JSON frame (``{"type": "alarm", ...}``).

    Sending never blocks: when the send queue is full the event is dropped
    and counted in ``dropped``. ``endpoint`` after construction is the bound
    address (useful with ``tcp://127.0.0.1:*``).
    """

    def __init__(self, endpoint: str | None = None, *, allow_remote: bool = False, sndhwm: int = 10000,
                 context: Any = None) -> None:
        import zmq

        self._zmq = zmq
        self._ctx = context or zmq.Context.instance()
        self._sock = self._ctx.socket(zmq.PUB)
        self._sock.setsockopt(zmq.SNDHWM, sndhwm)
        self._sock.setsockopt(zmq.LINGER, 200)
        ep = normalise_endpoint(endpoint, allow_remote=allow_remote)
        try:
            self._sock.bind(ep)
        except zmq.ZMQError as exc:
            self._sock.close(0)
            raise PublisherBindError(f"cannot bind the alarm publisher to {ep}: {exc}") from None
        self.endpoint = self._sock.getsockopt_string(zmq.LAST_ENDPOINT)
        self.sent = 0
        self.dropped = 0
        self._lock = threading.Lock()
        self._closed = False

    def on_alarm(self, event: AlarmEvent) -> None:
        data = event_line(event).encode("utf-8")
        with self._lock:
            if self._closed:
                return
            try:
                self._sock.send(data, self._zmq.NOBLOCK)
                self.sent += 1
            except self._zmq.ZMQError:
                self.dropped += 1

    def close(self) -> None:
        with self._lock:
            if not self._closed:
                self._closed = True
                self._sock.close()
