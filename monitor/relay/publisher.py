"""The relay publisher: a sink on a session's bus that republishes the run on ZeroMQ for consoles (data, alarms, status, state)."""

from __future__ import annotations

import collections
import threading
import time
import uuid
from typing import TYPE_CHECKING, Any, Mapping, Union

from adapters.base import SourceStatus
from monitor.alarms.events import AlarmEvent, AlarmView
from monitor.alarms.publisher import PublisherBindError as RelayBindError   # exit 3, as for the alarm publisher
from monitor.channels import BASE_KEYS
from monitor.model import Frame
from monitor.errors import UsageError
from monitor.relay.curve import RelayCurve, server_socket_keys, start_authenticator
from monitor.relay.state import data_columns, data_fields, event_json, frame_latest, state_header, status_json, view_json
from monitor.relay.wire import (TOPIC_ACTION, TOPIC_ALARM, TOPIC_DATA, TOPIC_STATE, TOPIC_STATUS, VERSION,
                                config_fingerprint, dumps, encode_columns, relay_endpoint, request_endpoint)

if TYPE_CHECKING:
    from monitor.session import Session

__all__ = ["RelayPublisher", "RelayBindError"]

_STATE_GAP = 0.1     # s between state messages sent for subscriptions (a console resubscribing in a loop costs little)

_Item = Union[tuple[str, Frame, int], tuple[str, AlarmEvent, "AlarmView | None"], tuple[str, SourceStatus, None],
              tuple[str, dict[str, Any], None]]


class RelayPublisher:
    """Republishes a Session's run on an XPUB socket bound at ``endpoint`` (loopback or ipc:// unless
    ``allow_remote``); ``endpoint`` after construction is the bound address.

    The bus handlers only queue (the run never waits for a console); one thread of its own encodes
    and sends. ZeroMQ drops messages for a console that does not read once its queue holds ``sndhwm``
    messages: the console sees the gap and catches up from the next state message, sent when a console
    subscribes and every ``interval`` seconds. More than ``queue`` items waiting are dropped
    (``dropped``); the next data message's ``accepted`` shows consoles the gap. Attach it before the
    run starts (its counts start from the session's at that moment)."""

    def __init__(self, session: Session, endpoint: str, *, allow_remote: bool = False, interval: float = 1.0,
                 sndhwm: int = 100_000, queue: int = 100_000, shot: str | None = None, context: Any = None,
                 requests: bool = True, curve: RelayCurve | None = None) -> None:
        import zmq

        self._zmq = zmq
        self._session = session
        self._auth: Any = None
        self.curve = curve
        if curve is not None:
            # a context of its own: one ZAP handler per context, admitting the consoles' keys
            self._ctx = zmq.Context()
            self._auth = start_authenticator(self._ctx, curve[1])
        else:
            self._ctx = context or zmq.Context.instance()
        self._sock = self._ctx.socket(zmq.XPUB)
        if curve is not None:
            try:
                server_socket_keys(self._sock, curve[0])
            except Exception:
                self._sock.close(0)
                self._stop_auth()
                raise
        self._sock.setsockopt(zmq.SNDHWM, sndhwm)
        self._sock.setsockopt(zmq.XPUB_VERBOSE, 1)     # every console's subscription, not only the first
        self._sock.setsockopt(zmq.LINGER, 0)
        try:
            ep = relay_endpoint(endpoint, allow_remote=allow_remote or curve is not None)
            self._sock.bind(ep)
        except (zmq.ZMQError, UsageError) as exc:
            self._sock.close(0)
            self._stop_auth()
            if isinstance(exc, UsageError):
                raise
            raise RelayBindError(f"cannot bind the relay to {ep}: {exc}") from None
        self.endpoint: str = self._sock.getsockopt_string(zmq.LAST_ENDPOINT)
        self.requests: str | None = request_endpoint(self.endpoint) if requests else None
        self.interval = float(interval)
        self.run = uuid.uuid4().hex[:16]
        self.identity: dict[str, Any] = {
            "run": self.run, "source": session.name, "config": config_fingerprint(session.config.raw),
            "started": time.time(), "shot": shot, "requests": self.requests, "interval": self.interval,
            "live": session.live}
        self._names = tuple(dict.fromkeys(BASE_KEYS + session.trail_names))
        self._queue: collections.deque[_Item] = collections.deque()
        self._limit = int(queue)
        self._accepted = sum(c.accepted for c in session.snapshot().counts.values())
        self._accepted_sent = self._accepted
        self._msg = 0
        self.sent = 0
        self.dropped = 0
        self.states = 0
        self.subscribers = 0
        self.cpu = 0.0          # CPU seconds of the relay's own thread (encoding and sending), once closed
        self._closed = threading.Event()
        self._thread = threading.Thread(target=self._loop, name="regime-relay", daemon=True)
        session.add_sink(self)
        self._thread.start()

    # -- bus handlers (the session's thread: queue only) ----------------------
    def on_frame(self, frame: Frame) -> None:
        before = self._accepted
        self._accepted += len(frame)
        self._put(("data", frame, before))

    def on_alarm(self, event: AlarmEvent) -> None:
        engine = self._session.engine
        view = next((v for v in engine.views() if v.alarm == event.alarm), None) if engine is not None else None
        self._put(("alarm", event, view))

    def on_status(self, status: SourceStatus) -> None:
        self._put(("status", status, None))

    def announce(self, record: Mapping[str, Any]) -> None:
        """Publish an operator action's record (the authority's ``regime.action`` messages)."""
        self._put(("action", dict(record), None))

    @property
    def pending(self) -> int:
        """Readings and events not sent yet (0: consoles have been sent everything the run made so far)."""
        return len(self._queue) + (self._accepted != self._accepted_sent)

    def _put(self, item: _Item) -> None:
        if len(self._queue) >= self._limit:
            self.dropped += 1
            return
        self._queue.append(item)

    # -- the relay's thread ----------------------------------------------------
    def _loop(self) -> None:
        zmq = self._zmq
        next_state = last_state = time.monotonic()
        while True:
            closing = self._closed.is_set()
            want = False
            try:
                while self._sock.poll(0 if self._queue or closing else 5, zmq.POLLIN):
                    msg = self._sock.recv()
                    if msg[:1] == b"\x01":
                        self.subscribers += 1
                        want = True
            except zmq.ZMQError:
                return
            while self._queue:
                self._send(self._queue.popleft())
            if want:
                # at once for a new console, but at most 10 a second however often consoles (re)subscribe
                next_state = min(next_state, last_state + min(_STATE_GAP, self.interval))
            if time.monotonic() >= next_state or closing:
                self._send_state()
                last_state = time.monotonic()
                next_state = last_state + self.interval
            if closing:
                self.cpu = time.thread_time()
                return

    def _header(self, kind: str) -> dict[str, Any]:
        self._msg += 1
        return {"v": VERSION, "type": kind, "run": self.run, "msg": self._msg}

    def _send(self, item: _Item) -> None:
        kind = item[0]
        if kind == "data":
            frame, before = item[1], item[2]
            assert isinstance(frame, Frame) and isinstance(before, int)
            fields = data_fields(frame, self._names)
            latest, warnings = frame_latest(frame)
            seq = None if frame.seq is None or not len(frame.seq) else [int(frame.seq[0]), int(frame.seq[-1])]
            h = self._header("data")
            h.update(n=len(frame), fields=fields, dtype="<f8", accepted=before, seq=seq, latest=latest,
                     warnings=warnings)
            self._out([TOPIC_DATA, dumps(h), encode_columns(data_columns(frame, fields))])
            self._accepted_sent = before + len(frame)
        elif kind == "alarm":
            event, view = item[1], item[2]
            assert isinstance(event, AlarmEvent)
            h = self._header("alarm")
            h.update(event=event_json(event), view=None if not isinstance(view, AlarmView) else view_json(view))
            self._out([TOPIC_ALARM, dumps(h)])
        elif kind == "status":
            assert isinstance(item[1], SourceStatus)
            h = self._header("status")
            h.update(status=status_json(item[1]))
            self._out([TOPIC_STATUS, dumps(h)])
        else:
            assert isinstance(item[1], dict)
            h = self._header("action")
            h.update(action=item[1])
            self._out([TOPIC_ACTION, dumps(h)])

    def _send_state(self) -> None:
        try:
            snap = self._session.snapshot()
        except Exception:  # noqa: BLE001 - a snapshot that fails is tried again next interval
            return
        names = tuple(snap.trail)
        h = self._header("state")
        h.update(state_header(snap, names, self._session.recent_events[-50:]))
        opts = self._session.config.pipeline
        h.update(identity=self.identity, accepted=self._accepted_sent, trail_seconds=opts.trail_seconds,
                 trail_points=opts.trail_points, fields=["t", *names],
                 n=int(len(snap.trail_t)), dtype="<f8")
        self._out([TOPIC_STATE, dumps(h), encode_columns([snap.trail_t, *(snap.trail[k] for k in names)])])
        self.states += 1

    def _out(self, parts: list[bytes]) -> None:
        try:
            self._sock.send_multipart(parts, self._zmq.NOBLOCK)
            self.sent += 1
        except self._zmq.ZMQError:
            self.dropped += 1

    def close(self) -> None:
        """Send what is queued and a last state, then close (idempotent)."""
        if self._closed.is_set():
            return
        self._closed.set()
        self._thread.join(timeout=5.0)
        # what is still queued for consoles goes out for up to 2 s more (ZeroMQ's I/O thread; close does not wait)
        self._sock.close(linger=2000)
        self._stop_auth()

    @property
    def context(self) -> Any:
        """The ZeroMQ context of the relay's sockets (the authority binds its socket in it, under the same keys)."""
        return self._ctx

    def _stop_auth(self) -> None:
        if self._auth is not None:
            self._auth.stop()
            self._auth = None
