"""A running session: one source polled with backoff, each batch through the pipeline and the alarm engine, out on the event bus."""

from __future__ import annotations

import dataclasses
import sys
import threading
import time
from typing import Any, Callable, Iterable, Literal, Mapping, Protocol, runtime_checkable

from adapters.base import Polled, Source, SourceStatus
from adapters.batch import Rejection
from monitor.alarms.engine import AlarmEngine
from monitor.alarms.events import AlarmEvent
from monitor.bus import EventBus
from monitor.config import Config
from monitor.model import Frame
from monitor.operator import (Acknowledge, Command, OutOfService, Pause, Reset, Resume, Seek, SetSpeed, Shelve,
                              StepReplay, Unshelve)
from monitor.pipeline import Pipeline
from monitor.recording.recorder import Recorder
from monitor.runner import SourceLink
from monitor.snapshot import ReplayPosition, Snapshot
from monitor.views import TRAIL_BASE, RunFacts, RunView

__all__ = ["Session", "make_engine", "TRAIL_BASE", "ReplaySource", "RECORDER_ALARM"]

RECORDER_ALARM = "recorder:write"       # the engine's alarm for the recorder's health
Cause = Literal["seek", "clock", "publisher"]


def make_engine(config: Config) -> AlarmEngine:
    """The alarm engine for ``config``."""
    return AlarmEngine.from_config(config)


@runtime_checkable
class ReplaySource(Protocol):
    """A source that can be steered (the CSV replay): pause, step, speed, seek and its position."""

    def pause(self) -> None: ...

    def resume(self) -> None: ...

    def step(self) -> None: ...

    def set_speed(self, speed: float | None) -> None: ...

    def seek(self, t: float) -> str | None: ...

    def position(self) -> ReplayPosition | tuple[float, float, float | None, float | None, bool] | None: ...


class Session:
    """Runs one Source through a Pipeline and an optional alarm engine, out on an EventBus.

    ``live`` True: the alarm engine's clock between batches is the last data
    time plus the wall time elapsed since it arrived (the wall clock itself
    before any data, so a silent source goes stale); False (replay): data time
    only. ``recorder`` (also attached to the bus) is the run's recorder, whose
    health the session raises as the engine's ``recorder:write`` alarm. One
    thread calls ``step``/``run``; any thread may call ``snapshot``,
    ``summary`` and ``apply`` (a lock keeps them consistent).
    """

    def __init__(self, source: Source, config: Config | None = None, sinks: Iterable[object] = (), *,
                 engine: AlarmEngine | None = None, live: bool = True, pipeline: Pipeline | None = None,
                 wall: Callable[[], float] = time.time, recorder: Recorder | None = None) -> None:
        self.source = source
        self.config = config if config is not None else Config()
        self.engine = engine
        self.live = live
        self.pipeline = pipeline if pipeline is not None else Pipeline(self.config)
        self.recorder = recorder
        self._wall = wall
        self._lock = threading.RLock()
        self._poll_lock = threading.Lock()
        self.view = RunView(self.config)
        self.bus = EventBus()
        self.bus.frames.subscribe(self.view.on_frame)
        self.bus.alarms.subscribe(self.view.events.on_alarm)
        for sink in sinks:
            self.bus.attach(sink)
        if recorder is not None and recorder not in self.bus.sinks:
            self.bus.attach(recorder)
        self.link = SourceLink(source, self._status_changed)
        self._last_t: float | None = None
        self._first_t: float | None = None
        self._last_arrival: float | None = None
        self._started = self._wall()
        self.internal_errors = 0

    # -- life cycle ---------------------------------------------------------
    @property
    def name(self) -> str:
        return self.link.status.name

    @property
    def ended(self) -> bool:
        return self.link.ended

    @property
    def failure(self) -> str | None:
        return self.link.failure

    @property
    def sinks(self) -> list[object]:
        return self.bus.sinks

    @property
    def sink_errors(self) -> int:
        return self.bus.errors

    @property
    def trail_names(self) -> tuple[str, ...]:
        return self.view.trail_names

    @property
    def recent_events(self) -> list[AlarmEvent]:
        return list(self.view.events.recent)

    def open(self) -> bool:
        """Open the source; a transient failure is a status and is retried by ``step``."""
        with self._lock:
            return self.link.open()

    def close(self) -> None:
        """Close the source and every sink (errors of one do not stop the others)."""
        got = self._poll_lock.acquire(timeout=5.0)   # let a poll in progress finish
        try:
            try:
                self.source.close()
            except Exception as exc:  # noqa: BLE001 - closing must reach every sink
                self.bus.failed(f"closing the source: {exc!r}")
            with self._lock:
                self.check_conditions()
            self.bus.close()
        finally:
            if got:
                self._poll_lock.release()

    def add_sink(self, sink: object) -> None:
        with self._lock:
            self.bus.attach(sink)

    # -- the loop -----------------------------------------------------------
    def step(self, timeout: float = 0.1) -> bool:
        """One poll of the source and the processing of what came; False once it ended or failed.

        Calls from several threads are serialised (the source is polled by one at a time)."""
        with self._poll_lock:
            return self._step(timeout)

    def _step(self, timeout: float) -> bool:
        polled = self.link.poll(timeout)
        if polled is None:
            return not self.link.ended
        with self._lock:
            self._handle(polled)
            self.link.settle(polled)
            if self.engine is not None and self.live:
                # before any data the wall clock stands in, so a source that never speaks goes stale
                now = self.now()
                self._dispatch(self.engine.tick(now if now is not None else self._wall(), self.name))
            self.check_conditions()
        return not self.link.ended

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
            self.bus.rejections.publish(list(polled.rejections))
        for batch in polled.batches:
            if len(batch) == 0:
                continue
            try:
                processed = self.pipeline.process_batch(batch)
            except Exception as exc:  # noqa: BLE001 - our own fault must not stop the run or lose readings
                self._internal_error(f"processing a batch from {batch.source}: {exc!r}")
                self.bus.rejections.publish(self.pipeline.refuse_batch(batch, "internal_error", repr(exc)))
                continue
            if processed.rejections:
                self.bus.rejections.publish(list(processed.rejections))
            for part in processed.parts:
                if part.restart is not None and len(part.frame):
                    self.restart(float(part.frame.t[0]), part.restart)
                if len(part.frame):
                    self._on_frame(part.frame)

    def restart(self, t: float, cause: Cause) -> None:
        """Time starts over at data time ``t``: a seek back (``"seek"``), a source clock that went back
        (``"clock"``) or a publisher that restarted its numbering (``"publisher"``). The trail, the
        session's clock and the alarm engine's timing (delays, stale, quality window, load figures)
        start over; alarm states are kept. For a seek the pipeline's state of the source starts over
        here too; for the other two the pipeline did so itself where it cut the batch."""
        if cause == "seek":
            self.pipeline.restart(self.name)
        self.view.restart()
        self._last_t = None
        if self.engine is not None:
            self.engine.on_seek(t)

    def _on_frame(self, frame: Frame) -> None:
        if self._first_t is None:
            self._first_t = float(frame.t[0])
        self._last_t = float(frame.t[-1])
        self._last_arrival = self._wall()
        self.bus.frames.publish(frame)
        if self.engine is not None:
            # gaps inside and before the frame are the engine's to judge (stale in data time)
            try:
                events = self.engine.process(frame)
            except Exception as exc:  # noqa: BLE001 - a fault in the alarm engine is loud, not fatal
                self._internal_error(f"alarm engine: {exc!r}")
                return
            self._dispatch(events)

    def check_conditions(self) -> None:
        """Conditions raised by parts of the tool, as the engine's alarms: the recorder's health as
        ``recorder:write`` (checked after every step and at the end of the run)."""
        if self.recorder is None or self.engine is None:
            return
        health = self.recorder.status()
        at = self.now()
        with self._lock:
            self._dispatch(self.engine.set_condition(RECORDER_ALARM, not health.ok, at if at is not None else 0.0,
                                                     health.message if not health.ok else "the disk accepts writes again"))

    def _dispatch(self, events: Iterable[AlarmEvent]) -> None:
        for ev in events:
            self.bus.alarms.publish(ev)

    def _status_changed(self, status: SourceStatus) -> None:
        with self._lock:
            self.bus.statuses.publish(status)

    def _internal_error(self, text: str) -> None:
        self.internal_errors += 1
        if self.internal_errors == 1:
            print(f"regime: internal error (further ones only counted): {text}", file=sys.stderr)

    # -- operator commands --------------------------------------------------
    def apply(self, command: Command) -> list[AlarmEvent] | bool:
        """Apply one operator command: alarm commands go to the engine (their events are dated at
        ``now()`` and published; an unknown alarm id raises monitor.operator.UnknownAlarm), replay
        commands to a source that can be steered (False where it cannot)."""
        if isinstance(command, (Seek, Pause, Resume, StepReplay, SetSpeed)):
            return self._replay(command)
        with self._lock:
            at = self.now()
            at = at if at is not None else 0.0
            engine = self.engine
            if engine is None:
                events: list[AlarmEvent] = []
            elif isinstance(command, Acknowledge):
                events = engine.acknowledge(command.alarm, at=at)
            elif isinstance(command, Shelve):
                events = engine.shelve(command.alarm, command.seconds, at=at)
            elif isinstance(command, Unshelve):
                events = engine.unshelve(command.alarm, at=at)
            elif isinstance(command, Reset):
                events = engine.reset(command.alarm, at=at)
            else:
                assert isinstance(command, OutOfService)
                events = engine.set_out_of_service(command.alarm, command.flag, at=at)
            if command.by is not None:      # an action from another console: its events say who acted
                events = [dataclasses.replace(e, operator=command.by) for e in events]
            self._dispatch(events)
            return events

    def _replay(self, command: Seek | Pause | Resume | StepReplay | SetSpeed) -> bool:
        source = self.source
        if not isinstance(source, ReplaySource):
            return False
        if isinstance(command, Seek):
            # waits for a poll in progress, so that no batch read before the seek is processed after it
            with self._poll_lock, self._lock:
                if source.seek(command.t) != "forward":
                    # a forward seek plays the skipped stretch through the pipeline and the engine
                    # like any other data; a seek back starts time over
                    self.restart(command.t, "seek")
            return True
        with self._lock:
            if isinstance(command, Pause):
                source.pause()
            elif isinstance(command, Resume):
                source.resume()
            elif isinstance(command, StepReplay):
                source.step()
            else:
                source.set_speed(command.speed)
        return True

    # the same commands as methods, for the screen's key bindings and for scripts
    def acknowledge(self, alarm: str | None = None) -> list[AlarmEvent]:
        """Acknowledge one alarm, or every unacknowledged one with None."""
        return self._events(self.apply(Acknowledge(alarm)))

    def shelve(self, alarm: str, seconds: float | None = None) -> list[AlarmEvent]:
        """Shelve for ``seconds`` (None: one-shot, until it returns to normal)."""
        return self._events(self.apply(Shelve(alarm, seconds)))

    def unshelve(self, alarm: str) -> list[AlarmEvent]:
        return self._events(self.apply(Unshelve(alarm)))

    def reset(self, alarm: str) -> list[AlarmEvent]:
        return self._events(self.apply(Reset(alarm)))

    def set_out_of_service(self, alarm: str, flag: bool) -> list[AlarmEvent]:
        return self._events(self.apply(OutOfService(alarm, flag)))

    @staticmethod
    def _events(result: list[AlarmEvent] | bool) -> list[AlarmEvent]:
        return result if isinstance(result, list) else []

    @property
    def can_replay(self) -> bool:
        return isinstance(self.source, ReplaySource)

    def pause(self) -> bool:
        return bool(self.apply(Pause()))

    def resume(self) -> bool:
        return bool(self.apply(Resume()))

    def step_replay(self) -> bool:
        return bool(self.apply(StepReplay()))

    def set_speed(self, speed: float | None) -> bool:
        return bool(self.apply(SetSpeed(speed)))

    def seek(self, t: float) -> bool:
        """Seek the replay to data time ``t`` (forward: played through; back: time starts over)."""
        return bool(self.apply(Seek(t)))

    def replay_position(self) -> ReplayPosition | None:
        source = self.source
        if not isinstance(source, ReplaySource):
            return None
        pos = source.position()
        if pos is None or isinstance(pos, ReplayPosition):
            return pos
        time_, start, end, speed, paused = pos
        return ReplayPosition(float(time_), float(start), None if end is None else float(end),
                              None if speed is None else float(speed), bool(paused))

    # -- views --------------------------------------------------------------
    def _facts(self) -> RunFacts:
        return RunFacts(name=self.name, status=self.link.status, live=self.live, data_time=self._last_t,
                        first_time=self._first_t, wall_time=self._wall(), started=self._started,
                        failure=self.failure, sink_errors=self.bus.errors, internal_errors=self.internal_errors,
                        replay=self.replay_position(),
                        recorder=self.recorder.status() if self.recorder is not None else None)

    def snapshot(self) -> Snapshot:
        """A consistent read-only picture, safe to call from another thread."""
        with self._lock:
            return self.view.snapshot(self._facts(), self.pipeline, self.engine)

    def summary(self) -> dict[str, Any]:
        """The summary contract: accepted, rejected {reason: n}, lost, and more."""
        with self._lock:
            return self.view.summary(self._facts(), self.pipeline, self.engine)

    def status(self) -> SourceStatus:
        with self._lock:
            return self.link.status

    def latest(self) -> Mapping[str, tuple[float, float | None]]:
        with self._lock:
            return dict(self.view.latest)

    def rejections(self) -> list[Rejection]:
        """The most recent rejections kept in memory (all of them went to the sinks)."""
        with self._lock:
            return list(self.pipeline.rejected_samples)
