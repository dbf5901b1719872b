"""Operator actions and replay controls of a Session: forwarded to the alarm engine and to the source."""

from __future__ import annotations

import threading
from dataclasses import replace
from typing import Any

from monitor.alarms.events import AlarmEvent, AlarmState
from monitor.errors import UsageError
from monitor.snapshot import ReplayPosition

__all__ = ["SessionControls"]


class SessionControls:
    """Mixed into monitor.session.Session, which provides the attributes below."""

    engine: Any
    source: Any
    pipeline: Any
    name: str
    _lock: threading.RLock
    _poll_lock: threading.Lock
    _last_t: float | None
    _external: dict[str, AlarmEvent]
    _wall: Any

    def now(self) -> float | None:  # pragma: no cover - provided by Session
        raise NotImplementedError

    def _dispatch(self, events: Any) -> None:  # pragma: no cover - provided by Session
        raise NotImplementedError

    def _new_trail(self) -> None:  # pragma: no cover - provided by Session
        raise NotImplementedError

    # -- operator actions (forwarded to the alarm engine) ---------------------
    def _action(self, name: str, *args: Any) -> list[AlarmEvent]:
        with self._lock:
            at = self.now()
            at = at if at is not None else 0.0
            alarm = args[0] if args else None
            external = getattr(self, "_external", {})
            if alarm in external:
                if name != "acknowledge":
                    raise KeyError(f"{alarm} is raised outside the alarm engine: it can be acknowledged, "
                                   f"and it returns by itself when its cause is gone")
                events = self._acknowledge_external([alarm], at)
            else:
                events = []
                if self.engine is not None:
                    try:
                        events = list(getattr(self.engine, name)(*args, at=at))
                    except UsageError as exc:          # an unknown alarm id: the caller's mistake, not ours
                        raise KeyError(str(exc)) from None
                if name == "acknowledge" and alarm is None:
                    events += self._acknowledge_external(list(external), at)
            self._dispatch(events)
            return events

    def _acknowledge_external(self, alarms: list[str], at: float) -> list[AlarmEvent]:
        """ISA-18.2 acknowledgement of alarms raised outside the engine (the recorder's): unacknowledged
        becomes acknowledged, returned unacknowledged becomes normal. Their origin hears the event as a
        sink (the recorder then knows that a later return or raise starts from the acknowledged state)."""
        events = []
        for alarm in alarms:
            last = self._external[alarm]
            after = {AlarmState.UNACKNOWLEDGED: AlarmState.ACKNOWLEDGED,
                     AlarmState.RETURNED_UNACKNOWLEDGED: AlarmState.NORMAL}.get(last.state)
            if after is None:
                continue
            ev = replace(last, time=at, wall=self._wall(), state=after, previous=last.state,
                         action="acknowledge", message=last.message)
            self._external[alarm] = ev
            events.append(ev)
        return events

    def acknowledge(self, alarm: str | None = None) -> list[AlarmEvent]:
        """Acknowledge one alarm, or every unacknowledged one with None.

        The operator actions date their events at ``now()``; an unknown alarm id raises KeyError."""
        return self._action("acknowledge", alarm)

    def shelve(self, alarm: str, seconds: float | None = None) -> list[AlarmEvent]:
        """Shelve for ``seconds`` (None: one-shot, until it returns to normal)."""
        return self._action("shelve", alarm, seconds)

    def unshelve(self, alarm: str) -> list[AlarmEvent]:
        return self._action("unshelve", alarm)

    def reset(self, alarm: str) -> list[AlarmEvent]:
        return self._action("reset", alarm)

    def set_out_of_service(self, alarm: str, flag: bool) -> list[AlarmEvent]:
        return self._action("set_out_of_service", alarm, flag)

    # -- replay controls (forwarded to the source if it has them) -------------
    @property
    def can_replay(self) -> bool:
        return callable(getattr(self.source, "position", None))

    def _control(self, name: str, *args: Any) -> bool:
        fn = getattr(self.source, name, None)
        if not callable(fn):
            return False
        with self._lock:
            fn(*args)
        return True

    def pause(self) -> bool:
        return self._control("pause")

    def resume(self) -> bool:
        return self._control("resume")

    def step_replay(self) -> bool:
        return self._control("step")

    def set_speed(self, speed: float | None) -> bool:
        return self._control("set_speed", speed)

    def seek(self, t: float) -> bool:
        """Seek the replay to data time ``t``.

        Forward (the source answers "forward", as CsvSource does): the source releases the stretch
        up to ``t`` at full speed, and the following steps play it through the pipeline and the alarm
        engine like any other data, so its alarms reach the journal and the states are right at ``t``;
        nothing starts over. Back (or a source that does not say): the pipeline, the trail and the
        engine's timing start over (time goes back); alarm states are kept.

        Waits for a poll in progress, so that no batch read before the seek is processed after it."""
        if not callable(getattr(self.source, "seek", None)):
            return False
        with self._poll_lock, self._lock:
            if self.source.seek(t) == "forward":
                return True
            self.pipeline.reset(self.name)
            self._new_trail()
            self._last_t = None
            hook = getattr(self.engine, "on_seek", None)
            if callable(hook):
                hook(t)
            return True

    def replay_position(self) -> ReplayPosition | None:
        fn = getattr(self.source, "position", None)
        if not callable(fn):
            return None
        pos = fn()
        if pos is None:
            return None
        if isinstance(pos, ReplayPosition):
            return pos
        time_, start, end, speed, paused = pos
        return ReplayPosition(float(time_), float(start), None if end is None else float(end),
                              None if speed is None else float(speed), bool(paused))

