"""Operator-load figures in data time: alarms per window, flood with hysteresis, chattering alarms."""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

from monitor.alarms.events import AlarmEvent, AlarmState

__all__ = ["Load", "LoadTracker", "is_activation"]


def is_activation(event: AlarmEvent) -> bool:
    """An annunciation: the alarm enters unacknowledged (or re-alarms there); operator actions never count."""
    return (event.action is None and event.state == AlarmState.UNACKNOWLEDGED
            and (event.previous != AlarmState.UNACKNOWLEDGED or event.message == "re-alarm"))


@dataclass(frozen=True)
class Load:
    alarms_per_window: int
    flood: bool
    chattering: tuple[str, ...]


class LoadTracker:
    """Counts activations over ``window`` s (flood: more than ``flood_count``, over below ``flood_clear``)
    and per alarm over ``chatter_window`` s (chattering: ``chatter_count`` or more). Every update
    costs O(1) amortised: times arrive in order and leave from the front."""

    def __init__(self, window: float = 600.0, flood_count: int = 10, flood_clear: int = 5,
                 chatter_window: float = 60.0, chatter_count: int = 3) -> None:
        self.window, self.flood_count, self.flood_clear = window, flood_count, flood_clear
        self.chatter_window, self.chatter_count = chatter_window, chatter_count
        self._recent: deque[float] = deque()                 # activation times within window
        self._by_alarm: dict[str, deque[float]] = {}         # per alarm, within chatter_window
        self._now: float | None = None
        self.flood = False

    def _prune(self) -> None:
        if self._now is None:
            return
        edge = self._now - self.window
        while self._recent and self._recent[0] <= edge:
            self._recent.popleft()
        edge = self._now - self.chatter_window
        for alarm in list(self._by_alarm):
            times = self._by_alarm[alarm]
            while times and times[0] <= edge:
                times.popleft()
            if not times:
                del self._by_alarm[alarm]

    def _update_flood(self) -> None:
        n = len(self._recent)
        if not self.flood and n > self.flood_count:
            self.flood = True
        elif self.flood and n < self.flood_clear:
            self.flood = False

    def record(self, events: list[AlarmEvent]) -> None:
        """Take events in time order."""
        for e in events:
            if self._now is None or e.time > self._now:
                self._now = e.time
            if is_activation(e):
                self._recent.append(e.time)
                self._by_alarm.setdefault(e.alarm, deque()).append(e.time)
                self._prune()
                self._update_flood()

    def advance(self, now: float) -> None:
        """Data time moved on (a processed sample); the windows slide."""
        if self._now is None or now > self._now:
            self._now = now
        self._prune()
        self._update_flood()

    def load(self) -> Load:
        if self._now is None:
            return Load(0, False, ())
        self._prune()
        chat = tuple(sorted(a for a, times in self._by_alarm.items() if len(times) >= self.chatter_count))
        return Load(len(self._recent), self.flood, chat)
