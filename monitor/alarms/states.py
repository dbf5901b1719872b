"""One alarm's ISA-18.2 / IEC 62682 state machine: raise, return, acknowledge, shelve, suppress, latch, reset."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

from monitor.alarms.detect import TIME_EPS
from monitor.alarms.events import AlarmEvent, AlarmState, Priority

__all__ = ["AlarmCore", "finite_or_none"]

_IN_ALARM = (AlarmState.UNACKNOWLEDGED, AlarmState.ACKNOWLEDGED)


def finite_or_none(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


@dataclass(eq=False)
class AlarmCore:
    """The state of one alarm; every change goes through a method that returns the events it caused.

    The ISA state is derived from a few flags: ``active`` (the process
    condition is in alarm), ``acked``, ``latched``, ``shelved``,
    ``suppressed``, ``out_of_service``. The condition keeps being evaluated
    while shelved or out of service, so unshelving shows the truth at once.
    """

    alarm: str
    kind: str
    quantity: str | None
    priority: Priority
    clock: Callable[[], float]
    description: str = ""
    latch: bool = False
    realarm_after: float | None = None
    max_shelve: float = 3600.0
    active: bool = False
    acked: bool = True
    latched: bool = False
    shelved: bool = False
    shelved_until: float | None = None
    one_shot: bool = False
    suppressed: bool = False
    out_of_service: bool = False
    state: AlarmState = AlarmState.NORMAL
    since: float | None = None
    value: float | None = None
    limit: float | None = None
    predicted_time: float | None = None
    realarm_at: float | None = None
    activations: int = 0
    trip_value: float | None = None        # the value that raised it last (kept after it returns)
    active_before_set: bool = False

    def __post_init__(self) -> None:
        self.state = self.derive()

    def derive(self) -> AlarmState:
        if self.out_of_service:
            return AlarmState.OUT_OF_SERVICE
        if self.suppressed:
            return AlarmState.SUPPRESSED
        if self.shelved:
            return AlarmState.SHELVED
        if self.active or self.latched:
            return AlarmState.ACKNOWLEDGED if self.acked else AlarmState.UNACKNOWLEDGED
        return AlarmState.NORMAL if self.acked else AlarmState.RETURNED_UNACKNOWLEDGED

    def _emit(self, t: float, action: str | None = None, message: str = "", *, force: bool = False) -> list[AlarmEvent]:
        new = self.derive()
        if new == self.state and not force and action is None:
            return []
        prev = self.state
        if new != prev:
            self.since = t
        self.state = new
        if new == AlarmState.UNACKNOWLEDGED and (prev != new or message == "re-alarm"):
            self.activations += 1
        if new in _IN_ALARM and self.realarm_after is not None:
            if prev not in _IN_ALARM or message == "re-alarm":
                self.realarm_at = t + self.realarm_after
        elif new not in _IN_ALARM:
            self.realarm_at = None
        return [AlarmEvent(time=float(t), wall=self.clock(), alarm=self.alarm, state=new, previous=prev,
                           quantity=self.quantity, value=finite_or_none(self.value), limit=finite_or_none(self.limit),
                           priority=self.priority, kind=self.kind, action=action, message=message,
                           predicted_time=finite_or_none(self.predicted_time))]

    # -- what the engine does -------------------------------------------------------------

    def set_active(self, flag: bool, t: float, value: float | None, limit: float | None) -> list[AlarmEvent]:
        """The process condition is raised (True) or has returned (False) at data time ``t``."""
        self.active_before_set = self.active
        self.active = flag
        self.value = value
        if limit is not None:
            self.limit = limit
        if flag:
            if not self.active_before_set:
                self.trip_value = value
            self.acked = False
            if self.latch:
                self.latched = True
        events = self._emit(t)
        if not flag and self.shelved and self.one_shot and not self.latched:
            events += self._unshelve(t, None, "one-shot shelve ended on return")
        return events

    def set_suppressed(self, flag: bool, t: float, value: float | None) -> list[AlarmEvent]:
        """Suppressed by design (discharge off): evaluation stops and starts afresh when it ends."""
        if flag == self.suppressed:
            return []
        self.suppressed = flag
        self.active = False
        self.value = value
        if not self.latched:
            self.acked = True
        return self._emit(t, message="discharge off" if flag else "discharge on")

    def due(self) -> float | None:
        """The next data time at which a deadline (shelve expiry, re-alarm) falls due."""
        times = [x for x in (self.shelved_until if self.shelved else None,
                             self.realarm_at if self.state in _IN_ALARM else None) if x is not None]
        return min(times) if times else None

    def fire_due(self, upto: float, strict: bool) -> list[AlarmEvent]:
        """Deadlines before ``upto`` (or at it, when not strict), in time order."""
        if not self.shelved and self.realarm_at is None:
            return []
        events: list[AlarmEvent] = []
        while True:
            d = self.due()
            if d is None or d > upto or (strict and d >= upto - TIME_EPS):
                return events
            if self.shelved and self.shelved_until is not None and d == self.shelved_until:
                events += self._unshelve(d, None, "shelve time over")
            else:
                self.acked = False
                events += self._emit(d, message="re-alarm", force=True)

    # -- operator actions -----------------------------------------------------------------

    def acknowledge(self, at: float) -> list[AlarmEvent]:
        if self.state not in (AlarmState.UNACKNOWLEDGED, AlarmState.RETURNED_UNACKNOWLEDGED):
            return []
        self.acked = True
        return self._emit(at, "acknowledge")

    def shelve(self, duration: float | None, at: float) -> list[AlarmEvent]:
        if self.out_of_service or self.suppressed:
            return self._emit(at, "shelve_refused", f"cannot shelve while {self.state.value}", force=True)
        limit = self.max_shelve
        message = "one-shot until return" if duration is None else f"for {duration:g} s"
        if duration is not None and duration > limit:
            message = f"for {limit:g} s (asked {duration:g} s, the maximum is {limit:g} s)"
            duration = limit
        self.shelved = True
        self.one_shot = duration is None
        self.shelved_until = at + (limit if duration is None else duration)
        return self._emit(at, "shelve", message)

    def _unshelve(self, at: float, action: str | None, message: str) -> list[AlarmEvent]:
        self.shelved = False
        self.shelved_until = None
        self.one_shot = False
        if not (self.active or self.latched):
            self.acked = True       # what returned while shelved needs no acknowledgement
        return self._emit(at, action, message)

    def unshelve(self, at: float) -> list[AlarmEvent]:
        if not self.shelved:
            return []
        return self._unshelve(at, "unshelve", "")

    def reset(self, at: float) -> list[AlarmEvent]:
        if not self.latched:
            return self._emit(at, "reset_refused", "not latched", force=True)
        if self.active or not self.acked:
            why = "still in alarm" if self.active else "not acknowledged"
            return self._emit(at, "reset_refused", f"reset refused: {why}", force=True)
        self.latched = False
        return self._emit(at, "reset")

    def set_out_of_service(self, flag: bool, at: float) -> list[AlarmEvent]:
        if flag == self.out_of_service:
            return []
        self.out_of_service = flag
        if not flag and not self.latched:
            self.acked = not self.active
        return self._emit(at, "out_of_service" if flag else "in_service")
