"""A running session: one source through the pipeline and the alarm engine to the sinks, with a thread-safe snapshot."""

from __future__ import annotations

import collections
import math
import sys
import threading
import time
from typing import Any, Callable, Iterable, Iterator, Mapping

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, Source, SourceStatus, TransientSourceError
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent, AlarmState
from monitor.config import Config
from monitor.model import Frame
from monitor.pipeline import Pipeline
from monitor.pipeline.controls import SessionControls
from monitor.pipeline.rolling import Trail
from monitor.snapshot import AlarmView, Snapshot, Stats

__all__ = ["Session", "make_engine", "TRAIL_BASE"]

TRAIL_BASE: tuple[str, ...] = ("ne", "Te", "debye_length")
# alarm states that want the operator's attention ("alarms_active" in the summary)
_ATTENTION = frozenset({"unacknowledged", "acknowledged", "returned_unacknowledged"})
_OPEN_BACKOFF = (0.2, 0.5, 1.0, 2.0, 5.0)


def make_engine(config: Config) -> Any:
    """The alarm engine for ``config`` (imported here, so that a session without alarms stays light)."""
    from monitor.alarms.engine import AlarmEngine

    return AlarmEngine.from_config(config)


class _LazyStats(Mapping[str, Stats]):
    """The rolling statistics of one source, computed only if the engine reads them."""

    def __init__(self, pipeline: Pipeline, source: str) -> None:
        self._pipeline, self._source = pipeline, source
        self._stats: dict[str, Stats] | None = None

    def _get(self) -> dict[str, Stats]:
        if self._stats is None:
            self._stats = self._pipeline.stats(self._source)
        return self._stats

    def __getitem__(self, key: str) -> Stats:
        return self._get()[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._get())

    def __len__(self) -> int:
        return len(self._get())


class Session(SessionControls):
    """Wires a Source, a Pipeline, an optional alarm engine and sinks.

    ``live`` True: the alarm engine's clock between batches is the last data
    time plus the wall time elapsed since it arrived (the wall clock itself
    before any data, so a silent source goes stale); False (replay): data time
    only. One thread calls ``step``/``run``; any thread may call ``snapshot``,
    ``summary`` and the operator actions (a lock keeps them consistent).
    """

    def __init__(self, source: Source, config: Config | None = None, sinks: Iterable[Any] = (), *,
                 engine: Any | None = None, live: bool = True, pipeline: Pipeline | None = None,
                 wall: Callable[[], float] = time.time) -> None:
        self.source = source
        self.config = config if config is not None else Config()
        self.sinks: list[Any] = list(sinks)
        self.engine = engine
        self.live = live
        self.pipeline = pipeline if pipeline is not None else Pipeline(self.config)
        self._wall = wall
        self._lock = threading.RLock()
        self._poll_lock = threading.Lock()
        names = list(TRAIL_BASE)
        for lim in self.config.limits:
            q = getattr(lim, "quantity", None)
            if isinstance(q, str) and q not in names:
                names.append(q)
        self.trail_names = tuple(names)
        self._new_trail()
        self._latest: dict[str, tuple[float, float | None]] = {}
        self._warnings: tuple[str, ...] = ()
        self._status: SourceStatus = SourceStatus(getattr(source, "name", "source"), LinkState.CONNECTING)
        self._opened = False
        self._open_failures = 0
        self._next_open = 0.0
        self._ended = False
        self.failure: str | None = None
        self._last_t: float | None = None
        self._first_t: float | None = None
        self._last_arrival: float | None = None
        # alarms raised outside the engine (the recorder's recorder:write): latest event per id
        self._external: dict[str, AlarmEvent] = {}
        self._started = self._wall()
        self._alarm_events = 0
        self._events_by_state: collections.Counter = collections.Counter()
        self.recent_events: collections.deque[AlarmEvent] = collections.deque(maxlen=200)
        self.sink_errors = 0
        self.internal_errors = 0
        self._sink_error_text: str | None = None

    # -- life cycle ---------------------------------------------------------
    @property
    def name(self) -> str:
        return self._status.name

    @property
    def ended(self) -> bool:
        return self._ended

    def open(self) -> bool:
        """Open the source; a transient failure is a status and is retried by ``step``."""
        try:
            self.source.open()
        except TransientSourceError as exc:
            self._open_failures += 1
            delay = _OPEN_BACKOFF[min(self._open_failures - 1, len(_OPEN_BACKOFF) - 1)]
            self._next_open = time.monotonic() + delay
            self._set_status(SourceStatus(self.name, LinkState.DISCONNECTED, str(exc), self._open_failures))
            return False
        except FatalSourceError as exc:
            self._fail(str(exc))
            return False
        self._opened = True
        self._set_status(self._source_status())
        return True

    def close(self) -> None:
        """Close the source and every sink (errors of one do not stop the others)."""
        got = self._poll_lock.acquire(timeout=5.0)   # let a poll in progress finish
        try:
            try:
                self.source.close()
            except Exception as exc:  # noqa: BLE001 - closing must reach every sink
                self._sink_error(f"closing the source: {exc!r}")
            for sink in self.sinks:
                self._call(sink, "close")
        finally:
            if got:
                self._poll_lock.release()

    def add_sink(self, sink: Any) -> None:
        with self._lock:
            self.sinks.append(sink)

    def emit(self, event: AlarmEvent, *, origin: Any = None) -> None:
        """Hand an alarm event raised outside the engine (e.g. the recorder's own write alarm) to
        every sink but ``origin``, which has already kept it."""
        with self._lock:
            self._alarm_events += 1
            self._events_by_state[getattr(event.state, "value", str(event.state))] += 1
            self.recent_events.append(event)
            self._external[event.alarm] = event
            for sink in self.sinks:
                if sink is not origin:
                    self._call(sink, "on_alarm", event)

    # -- the loop -----------------------------------------------------------
    def step(self, timeout: float = 0.1) -> bool:
        """One poll of the source and the processing of what came; False once it ended or failed.

        Calls from several threads are serialised (the source is polled by one at a time)."""
        with self._poll_lock:
            return self._step(timeout)

    def _step(self, timeout: float) -> bool:
        if self._ended:
            return False
        if not self._opened:
            if time.monotonic() < self._next_open:
                time.sleep(min(timeout, max(0.0, self._next_open - time.monotonic())))
                return True
            if not self.open():
                return not self._ended
        try:
            polled = self.source.poll(timeout)
        except TransientSourceError as exc:
            self._set_status(SourceStatus(self.name, LinkState.DISCONNECTED, str(exc)))
            return True
        except FatalSourceError as exc:
            self._fail(str(exc))
            return False
        with self._lock:
            self._handle(polled)
            status = polled.status if polled.status is not None else self._source_status()
            self._set_status(status)
            if self.engine is not None and self.live:
                # before any data the wall clock stands in, so a source that never speaks goes stale
                now = self.now()
                self._dispatch(self.engine.tick(now if now is not None else self._wall(), self.name))
            if status.state is LinkState.ENDED:
                self._ended = True
            elif status.state is LinkState.FAILED:
                self._fail(status.message or "the source gave up")
        return not self._ended

    def run(self, duration: float | None = None, stop: threading.Event | None = None, *,
            on_interval: Callable[["Session"], None] | None = None, interval: float = 1.0,
            timeout: float = 0.05) -> None:
        """Step until the source ends, ``stop`` is set or ``duration`` wall seconds have passed."""
        start = time.monotonic()
        next_call = start + interval
        while True:
            if stop is not None and stop.is_set():
                break
            now = time.monotonic()
            if duration is not None and now - start >= duration:
                break
            wait = timeout if duration is None else max(0.0, min(timeout, duration - (now - start)))
            more = self.step(wait)
            if on_interval is not None and time.monotonic() >= next_call:
                on_interval(self)
                next_call = time.monotonic() + interval
            if not more:
                break

    def now(self) -> float | None:
        """The session's data-time clock (see the class docstring); None before any data."""
        if self._last_t is None:
            return None
        if not self.live or self._last_arrival is None:
            return self._last_t
        return self._last_t + max(0.0, self._wall() - self._last_arrival)

    # -- processing ---------------------------------------------------------
    def _handle(self, polled: Polled) -> None:
        if polled.rejections:
            self.pipeline.reject(polled.rejections)
            self._fan("on_rejections", list(polled.rejections))
        for batch in polled.batches:
            if len(batch) == 0:
                continue
            try:
                parts = self.pipeline.process_parts(batch)
            except Exception as exc:  # noqa: BLE001 - our own fault must not stop the run or lose readings
                self._internal_error(f"processing a batch from {batch.source}: {exc!r}")
                self._fan("on_rejections", self.pipeline.refuse_batch(batch, "internal_error", repr(exc)))
                continue
            rejected = self.pipeline.drain_rejections()
            if rejected:
                self._fan("on_rejections", rejected)
            for frame, new_clock in parts:
                if new_clock:
                    self._clock_restarted(frame)
                if len(frame):
                    self._on_frame(frame)

    def _clock_restarted(self, frame: Frame) -> None:
        """The source's clock went back (a counted restart): the trail and the alarm engine's timing
        start over from the new clock, as after a seek back; alarm states are kept."""
        self._new_trail()
        self._last_t = None
        hook = getattr(self.engine, "on_seek", None)
        if callable(hook):
            hook(float(frame.t[0]) if len(frame) else math.nan)

    def _on_frame(self, frame: Frame) -> None:
        if self._first_t is None:
            self._first_t = float(frame.t[0])
        self._last_t = float(frame.t[-1])
        self._last_arrival = self._wall()
        latest: dict[str, tuple[float, float | None]] = {}
        for name, arr in frame.values.items():
            s = frame.sigma.get(name)
            sv = float(s[-1]) if s is not None and np.isfinite(s[-1]) else None
            latest[name] = (float(arr[-1]), sv)
        self._latest = latest
        self._warnings = tuple(k for k, m in frame.warnings.items() if len(m) and bool(m[-1]))
        self._trail.add(frame.t, frame.values)
        self._fan("on_frame", frame)
        if self.engine is not None:
            # gaps inside and before the frame are the engine's to judge (stale in data time)
            try:
                events = self.engine.process(frame, _LazyStats(self.pipeline, frame.source))
            except Exception as exc:  # noqa: BLE001 - a fault in the alarm engine is loud, not fatal
                self._internal_error(f"alarm engine: {exc!r}")
                return
            self._dispatch(events)

    def _dispatch(self, events: Iterable[AlarmEvent]) -> None:
        for ev in events:
            self._alarm_events += 1
            self._events_by_state[getattr(ev.state, "value", str(ev.state))] += 1
            self.recent_events.append(ev)
            self._fan("on_alarm", ev)

    def _source_status(self) -> SourceStatus:
        try:
            return self.source.status()
        except Exception as exc:  # noqa: BLE001 - a broken status() is shown, not raised
            return SourceStatus(self.name, LinkState.DISCONNECTED, f"status unavailable: {exc!r}")

    def _set_status(self, status: SourceStatus) -> None:
        with self._lock:
            prev, self._status = self._status, status
            # sinks hear of link changes; a connected source's chatty message is only kept
            changed = status.state is not prev.state or (
                status.state is not LinkState.CONNECTED and status.message != prev.message)
            if changed or status.retries != prev.retries:
                self._fan("on_status", status)

    def _fail(self, message: str) -> None:
        with self._lock:
            self.failure = message
            self._ended = True
            self._set_status(SourceStatus(self.name, LinkState.FAILED, message))

    def _fan(self, method: str, arg: Any) -> None:
        for sink in self.sinks:
            self._call(sink, method, arg)

    def _call(self, sink: Any, method: str, *args: Any) -> None:
        fn = getattr(sink, method, None)
        if fn is None:
            return
        try:
            fn(*args)
        except Exception as exc:  # noqa: BLE001 - a failing sink must not stop the session
            self._sink_error(f"{type(sink).__name__}.{method}: {exc!r}")

    def _internal_error(self, text: str) -> None:
        self.internal_errors += 1
        if self.internal_errors == 1:
            print(f"regime: internal error (further ones only counted): {text}", file=sys.stderr)

    def _sink_error(self, text: str) -> None:
        self.sink_errors += 1
        if self._sink_error_text is None:
            print(f"regime: sink error (further ones only counted): {text}", file=sys.stderr)
        self._sink_error_text = text

    def _new_trail(self) -> None:
        opts = self.config.pipeline
        self._trail = Trail(self.trail_names, opts.trail_seconds, opts.trail_points)

    # -- views --------------------------------------------------------------
    def snapshot(self) -> Snapshot:
        """A consistent read-only picture, safe to call from another thread."""
        with self._lock:
            trail_t, trail = self._trail.arrays()
            counts = self.pipeline.counts()
            latest = dict(self._latest)
            flood, rate10, chatter = False, 0, ()
            alarms: tuple = ()
            if self.engine is not None:
                alarms = tuple(self.engine.views())
                rate10, flood, chatter = self.engine.load()
            alarms += self._external_views()
            if self.engine is not None:
                discharge_on = bool(self.engine.discharge_on)
            else:
                ne = latest.get("ne", (math.nan, None))[0]
                discharge_on = bool(ne >= self.config.on_above)
            return Snapshot(
                data_time=self._last_t, wall_time=self._wall(), latest=latest,
                stats=self.pipeline.stats(self.name) or self.pipeline.stats(),
                trail_t=trail_t, trail=trail, warnings=self._warnings,
                sources={self.name: self._status}, counts=counts, alarms=alarms,
                discharge_on=discharge_on, live=self.live, replay=self.replay_position(),
                recording=self._recording(), recorder=self._recorder_status(),
                flood=bool(flood), alarm_rate_10min=int(rate10),
                chattering=tuple(chatter),
            )

    def _external_views(self) -> tuple[AlarmView, ...]:
        """The alarms raised outside the engine that are not normal, as the alarm list shows them."""
        return tuple(AlarmView(alarm=e.alarm, state=e.state, priority=e.priority, kind=e.kind,
                               quantity=e.quantity, value=e.value, limit=e.limit, since=e.time,
                               description=e.message)
                     for e in self._external.values() if e.state is not AlarmState.NORMAL)

    def _recorder_status(self) -> Any:
        """The RecorderStatus of the sink that records (the one with a ``recording`` attribute), or None."""
        for sink in self.sinks:
            if hasattr(sink, "recording") and callable(getattr(sink, "status", None)):
                try:
                    return sink.status()
                except Exception:  # noqa: BLE001 - a broken status is not shown, never raised
                    return None
        return None

    def _recording(self) -> str | None:
        for sink in self.sinks:
            rec = getattr(sink, "recording", None)
            if callable(rec):
                try:
                    rec = rec()
                except Exception:  # noqa: BLE001
                    rec = None
            if isinstance(rec, str) and rec:
                return rec
        return None

    def status(self) -> SourceStatus:
        with self._lock:
            return self._status

    def summary(self) -> dict[str, Any]:
        """The summary contract: accepted, rejected {reason: n}, lost, and more."""
        with self._lock:
            counts = self.pipeline.counts()
            rejected: collections.Counter = collections.Counter()
            unknown: collections.Counter = collections.Counter()
            for c in counts.values():
                rejected.update(c.rejected)
                unknown.update(c.unknown_keys)
            active = []
            if self.engine is not None:
                active = [v.alarm for v in self.engine.views()
                          if getattr(v.state, "value", v.state) in _ATTENTION]
            active += [v.alarm for v in self._external_views() if v.state.value in _ATTENTION]
            return {
                "type": "summary",
                "source": self.name,
                "accepted": sum(c.accepted for c in counts.values()),
                "rejected": dict(sorted(rejected.items())),
                "rejected_total": int(sum(rejected.values())),
                "lost": sum(c.lost for c in counts.values()),
                "unknown_keys": dict(sorted(unknown.items())),
                "restarts": sum(self.pipeline.restarts().values()),
                "data_time_first": self._first_t,
                "data_time_last": self._last_t,
                "wall_seconds": round(self._wall() - self._started, 3),
                "state": self._status.state.value,
                "message": self._status.message,
                "failure": self.failure,
                "alarm_events": self._alarm_events,
                "alarm_events_by_state": dict(sorted(self._events_by_state.items())),
                "alarms_active": active,
                "sink_errors": self.sink_errors,
                "internal_errors": self.internal_errors,
            }

    def latest(self) -> Mapping[str, tuple[float, float | None]]:
        with self._lock:
            return dict(self._latest)

    def rejections(self) -> list[Rejection]:
        """The most recent rejections kept in memory (all of them went to the sinks)."""
        with self._lock:
            return list(self.pipeline.rejected_samples)
