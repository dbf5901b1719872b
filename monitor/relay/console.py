"""A console attached to a relay: rebuilds the owner's picture (readings, alarm states, counts) without an engine of its own."""

from __future__ import annotations

import collections
import json
import threading
import time
from typing import Any, Callable, Mapping

import numpy as np

from adapters.base import LinkState, SourceStatus
from monitor.alarms.events import AlarmEvent, AlarmView
from monitor.pipeline.rolling import Trail
from monitor.relay.curve import ConsoleCurve, client_socket_keys
from monitor.relay.state import counts_from, event_from, snapshot_from, status_from, view_from
from monitor.relay.wire import TOPIC_PREFIX, VERSION, console_endpoint, decode_columns
from monitor.snapshot import Snapshot, SourceCounts

__all__ = ["RelayConsole"]

_SILENT_AFTER = 3.0     # intervals without a message before the relay counts as lost


class RelayConsole:
    """Subscribes to a relay (``relay+tcp://HOST:PORT`` or ``relay+ipc://PATH``) and keeps the owner's picture.

    ``received`` counts the readings this console got in the current run, ``missed`` those it did not
    (the owner's ``accepted`` in each data message shows the gap); ``accepted`` is the owner's count as
    the stream last said it. A gap in the message numbers means the console fell behind (``behind``)
    until the next state message restores alarms, counts and trail. A new run id is an owner that
    restarted: the picture starts over and ``runs`` grows. ``poll`` is called by one thread; ``snapshot``
    and the properties from any (a lock keeps them consistent)."""

    def __init__(self, spec: str, *, context: Any = None, rcvhwm: int = 100_000,
                 clock: Callable[[], float] = time.time, on_event: Callable[[AlarmEvent], None] | None = None,
                 curve: ConsoleCurve | None = None) -> None:
        self.endpoint = console_endpoint(spec)
        self.curve = curve
        self._ctx = context
        self._rcvhwm = rcvhwm
        self._clock = clock
        self.on_event = on_event
        self._sock: Any = None
        self._lock = threading.RLock()
        self.run: str | None = None
        self.runs: list[str] = []
        self.identity: dict[str, Any] = {}
        self.notices: collections.deque[str] = collections.deque(maxlen=50)
        self.events: collections.deque[AlarmEvent] = collections.deque(maxlen=5000)
        self.actions: collections.deque[dict[str, Any]] = collections.deque(maxlen=200)
        self.bad_messages = 0
        self.notice_total = 0
        self._last_seen: float | None = None
        self._reset()

    def _reset(self) -> None:
        self.received = 0
        self.missed = 0
        self.gaps = 0
        self.accepted: int | None = None
        self.behind = False
        self.states = 0
        self._last_msg: int | None = None
        self._state: dict[str, Any] | None = None
        self._alarms: dict[str, AlarmView] = {}
        self._trail: Trail | None = None
        self._latest: dict[str, tuple[float, float | None]] = {}
        self._warnings: tuple[str, ...] = ()
        self._data_time: float | None = None
        self._discharge: bool | None = None
        self._owner: SourceStatus | None = None
        self._held: list[AlarmEvent] = []

    # -- life cycle --------------------------------------------------------------
    def open(self) -> None:
        import zmq
        ctx = self._ctx or zmq.Context.instance()
        self._sock = ctx.socket(zmq.SUB)
        if self.curve is not None:
            client_socket_keys(self._sock, self.curve)
        self._sock.setsockopt(zmq.RCVHWM, self._rcvhwm)
        self._sock.setsockopt(zmq.MAXMSGSIZE, 256 * 2**20)     # a memory defence against a hostile relay
        self._sock.setsockopt(zmq.LINGER, 0)
        self._sock.setsockopt(zmq.SUBSCRIBE, TOPIC_PREFIX)
        self._sock.connect(self.endpoint)

    @property
    def is_open(self) -> bool:
        return self._sock is not None

    def close(self) -> None:
        if self._sock is not None:
            self._sock.close(0)
            self._sock = None

    def poll(self, timeout: float = 0.05, *, most: int = 10_000) -> int:
        """Handle what has arrived (waiting up to ``timeout`` s for the first message); how many."""
        import zmq
        sock = self._sock
        if sock is None:
            raise RuntimeError("RelayConsole.poll before open()")
        handled = 0
        wait = int(max(0.0, timeout) * 1000)
        while handled < most and sock.poll(wait if handled == 0 else 0, zmq.POLLIN):
            parts = sock.recv_multipart(copy=False)
            self.handle([p.buffer for p in parts])
            handled += 1
        return handled

    # -- messages ----------------------------------------------------------------
    def handle(self, parts: list[memoryview] | list[bytes]) -> None:
        """Apply one relay message (topic, JSON header, optional binary columns); a message that cannot be
        read is counted in ``bad_messages`` and changes nothing."""
        try:
            h = json.loads(bytes(parts[1]))
            if h.get("v") != VERSION:
                raise ValueError(f"relay format version {h.get('v')!r}")
            kind = h["type"]
            block = decode_columns(h, parts[2]) if kind in ("data", "state") else None
        except (ValueError, KeyError, IndexError, TypeError):
            self.bad_messages += 1
            return
        with self._lock:
            self._last_seen = self._clock()
            self._follow(h)
            if kind == "data" and block is not None:
                self._data(h, block.columns)
            elif kind == "state" and block is not None:
                self._state_message(h, block.columns)
            elif kind == "alarm":
                self._alarm(h)
            elif kind == "status":
                self._owner = status_from(h["status"])
            elif kind == "action":
                self.actions.append(dict(h["action"]))

    def _follow(self, h: Mapping[str, Any]) -> None:
        run = str(h["run"])
        if run != self.run:
            if self.run is not None:
                self._notice(f"a new run began ({run}); the owner restarted")
            self._reset()
            self.run = run
            self.runs.append(run)
        msg = int(h["msg"])
        if self._last_msg is not None and msg > self._last_msg + 1:
            self.gaps += msg - self._last_msg - 1
            if not self.behind:
                self._notice(f"fell behind: {msg - self._last_msg - 1} messages missed; "
                                    "catching up from the next state")
            self.behind = True
        self._last_msg = msg

    def _notice(self, text: str) -> None:
        self.notices.append(text)
        self.notice_total += 1

    def notices_since(self, seen: int) -> tuple[list[str], int]:
        """Notices after the first ``seen`` ever made (those still kept), and the total so far."""
        with self._lock:
            new = min(self.notice_total - seen, len(self.notices))
            return (list(self.notices)[len(self.notices) - new:] if new > 0 else []), self.notice_total

    def _data(self, h: Mapping[str, Any], cols: Mapping[str, np.ndarray]) -> None:
        n = int(h["n"])
        before = int(h["accepted"])
        if self.accepted is not None and before > self.accepted:
            self.missed += before - self.accepted
        self.accepted = before + n
        self.received += n
        if n == 0:
            return
        t = cols["t"]
        if self._trail is not None:
            self._trail.add(t, cols)
        self._latest = {k: (_num(v[0]), None if v[1] is None else float(v[1])) for k, v in h["latest"].items()}
        self._warnings = tuple(h.get("warnings") or ())
        self._data_time = float(t[-1])
        d = cols["discharge"][-1]
        self._discharge = None if not np.isfinite(d) else bool(d)

    def _state_message(self, h: dict[str, Any], cols: Mapping[str, np.ndarray]) -> None:
        self.states += 1
        self._state = h
        self.identity = dict(h.get("identity") or {})
        self._alarms = {v.alarm: v for v in (view_from(d) for d in h.get("alarms") or ())}
        sources = h.get("sources") or {}
        if sources:
            self._owner = status_from(next(iter(sources.values())))
        sent = int(h["accepted"])          # every reading sent before this state
        if self.accepted is None:
            self.accepted = sent
        elif sent > self.accepted:
            self.missed += sent - self.accepted
            self.accepted = sent
        if self._trail is None or self.behind:
            names = tuple(h.get("trail_names") or ())
            self._trail = Trail(names, float(h.get("trail_seconds") or 60.0), int(h.get("trail_points") or 600))
            self._trail.add(cols["t"], cols)
        if self._data_time is None or self.behind:
            self._latest = {k: (_num(v[0]), None if v[1] is None else float(v[1])) for k, v in h["latest"].items()}
            self._warnings = tuple(h.get("warnings") or ())
            self._data_time = h.get("data_time")
            self._discharge = bool(h["discharge_on"]) if h.get("discharge_known") else None
        if self.behind:
            self._notice(f"caught up from the owner's state; {self.missed} readings missed so far")
            self.behind = False
        if self.states == 1:
            # the owner's recent events first, then those heard before this state that it does not hold
            recent = [event_from(d) for d in h.get("recent") or ()]
            known = {_key(e) for e in recent}
            held, self._held = self._held, []
            for event in recent + [e for e in held if _key(e) not in known]:
                self._event(event)

    def _alarm(self, h: Mapping[str, Any]) -> None:
        event = event_from(h["event"])
        if h.get("view"):
            view = view_from(h["view"])
            self._alarms[view.alarm] = view
        if self.states == 0:
            self._held.append(event)      # told in order with the owner's recent events at the first state
        else:
            self._event(event)

    def _event(self, event: AlarmEvent) -> None:
        self.events.append(event)
        if self.on_event is not None:
            self.on_event(event)

    # -- the picture -------------------------------------------------------------
    @property
    def requests(self) -> str | None:
        """The owner's request address, as the console can reach it (its host for a TCP relay)."""
        req = self.identity.get("requests")
        if not isinstance(req, str):
            return None
        if req.startswith("tcp://") and self.endpoint.startswith("tcp://"):
            host = self.endpoint[len("tcp://"):].rpartition(":")[0]
            return f"tcp://{host}:{req.rpartition(':')[2]}"
        return req

    def link(self) -> SourceStatus:
        """The relay itself as a source line: connecting, connected (with what it knows), or disconnected."""
        with self._lock:
            name = f"relay {self.endpoint}"
            if self._last_seen is None:
                return SourceStatus(name, LinkState.CONNECTING, "waiting for the owner")
            interval = float(self.identity.get("interval") or 1.0)
            silent = self._clock() - self._last_seen
            if silent > _SILENT_AFTER * interval:
                return SourceStatus(name, LinkState.DISCONNECTED, f"owner silent for {silent:.0f} s")
            return SourceStatus(name, LinkState.CONNECTED, self.notices[-1] if self.notices else
                                f"run {self.run} of {self.identity.get('source', '?')}")

    @property
    def owner_status(self) -> SourceStatus | None:
        """The owner's source status as last relayed (``ended`` once its run is over)."""
        with self._lock:
            return self._owner

    def alarms(self) -> tuple[AlarmView, ...]:
        with self._lock:
            return tuple(self._alarms.values())

    def snapshot(self) -> Snapshot | None:
        """The owner's picture as this console has it; None before the first state message."""
        link = self.link()
        with self._lock:
            h = self._state
            if h is None or self._trail is None:
                return None
            counts: dict[str, SourceCounts] = {k: counts_from(v) for k, v in (h.get("counts") or {}).items()}
            if counts and self.accepted is not None:
                name = next(iter(counts))
                c = counts[name]
                counts[name] = SourceCounts(self.accepted, c.rejected, c.lost, c.unknown_keys, c.rate,
                                            c.last_data_time, c.last_wall_time)
            sources = {} if self._owner is None else {self._owner.name: self._owner}
            sources[link.name] = link
            trail_t, trail = self._trail.arrays()
            return snapshot_from(h, trail_t, trail, wall_time=self._clock(), alarms=tuple(self._alarms.values()),
                                 counts=counts, sources=sources, latest=self._latest, warnings=self._warnings,
                                 data_time=self._data_time, discharge=self._discharge)

    def summary(self) -> dict[str, Any]:
        with self._lock:
            return {"type": "relay", "run": self.run, "runs": len(self.runs), "received": self.received,
                    "missed": self.missed, "accepted": self.accepted, "gaps": self.gaps, "states": self.states,
                    "bad_messages": self.bad_messages, "behind": self.behind}


def _key(e: AlarmEvent) -> tuple[float, str, str, float, str | None]:
    return (e.wall, e.alarm, e.state.value, e.time, e.action)


def _num(x: Any) -> float:
    return float("nan") if x is None else float(x)
