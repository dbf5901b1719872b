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
    and per alarm over ``chatter_window`` s (chattering: ``chatter_count`` or more)."""

    def __init__(self, window: float = 600.0, flood_count: int = 10, flood_clear: int = 5,
                 chatter_window: float = 60.0, chatter_count: int = 3) -> None:
        self.window, self.flood_count, self.flood_clear = window, flood_count, flood_clear
        self.chatter_window, self.chatter_count = chatter_window, chatter_count
        self._times: deque[tuple[float, str]] = deque()
        self._now: float | None = None
        self.flood = False

    def _prune(self) -> None:
        if self._now is None:
            return
        keep = self._now - max(self.window, self.chatter_window)
        while self._times and self._times[0][0] <= keep:
            self._times.popleft()

    def _count(self) -> int:
        assert self._now is not None
        return sum(1 for t, _ in self._times if t > self._now - self.window)

    def _update_flood(self) -> None:
        n = self._count()
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
                self._times.append((e.time, e.alarm))
                self._update_flood()

    def advance(self, now: float) -> None:
        """Data time moved on (a processed sample); the window slides."""
        if self._now is None or now > self._now:
            self._now = now
        self._prune()
        self._update_flood()

    def load(self) -> Load:
        if self._now is None:
            return Load(0, False, ())
        per: dict[str, int] = {}
        for t, alarm in self._times:
            if t > self._now - self.chatter_window:
                per[alarm] = per.get(alarm, 0) + 1
        chat = tuple(sorted(a for a, n in per.items() if n >= self.chatter_count))
        return Load(self._count(), self.flood, chat)
