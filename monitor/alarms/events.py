"""Alarm states, priorities and the event record that every sink receives."""

from __future__ import annotations

import enum
from dataclasses import dataclass, asdict
from typing import Any

__all__ = ["AlarmState", "Priority", "AlarmEvent", "AlarmView"]


class AlarmState(str, enum.Enum):
    """The states of ANSI/ISA-18.2 and IEC 62682, named as in all machine-readable output."""

    NORMAL = "normal"
    UNACKNOWLEDGED = "unacknowledged"
    ACKNOWLEDGED = "acknowledged"
    RETURNED_UNACKNOWLEDGED = "returned_unacknowledged"
    SHELVED = "shelved"
    SUPPRESSED = "suppressed"
    OUT_OF_SERVICE = "out_of_service"


class Priority(str, enum.Enum):
    """Three priorities in plain words of our own."""

    URGENT = "urgent"
    HIGH = "high"
    ADVISORY = "advisory"


@dataclass(frozen=True)
class AlarmEvent:
    """One transition or one operator action.

    ``time`` is data time (s), ``wall`` wall-clock time (s since the epoch).
    ``action`` is None for a transition the engine made, or the operator's
    action (``acknowledge``, ``shelve``, ``unshelve``, ``reset``, ...).
    ``kind`` is ``limit``, ``predictive``, ``stale`` or ``quality``.
    """

    time: float
    wall: float
    alarm: str
    state: AlarmState
    previous: AlarmState
    quantity: str | None
    value: float | None
    limit: float | None
    priority: Priority
    kind: str = "limit"
    action: str | None = None
    message: str = ""
    predicted_time: float | None = None
    operator: str | None = None     # who acted, for an operator action from another console (a relay's key)

    def to_json(self) -> dict[str, Any]:
        """The contract of ``{"type": "alarm", ...}`` lines and the journal."""
        d = asdict(self)
        d["state"] = self.state.value
        d["previous"] = self.previous.value
        d["priority"] = self.priority.value
        return {"type": "alarm", **d}


@dataclass(frozen=True)
class AlarmView:
    """One alarm as the operator's list shows it (also those in normal state)."""

    alarm: str
    state: AlarmState
    priority: Priority
    kind: str                      # limit, predictive, stale, quality
    quantity: str | None
    value: float | None
    limit: float | None
    since: float | None            # data time of the last transition
    description: str = ""
    predicted_time: float | None = None   # data time the limit is expected to be reached
    latched: bool = False
    shelved_until: float | None = None
    trip_value: float | None = None       # the value that raised it (``value`` is the one at the last transition)
    active: bool = False                  # its condition holds now (whatever the operator did with it)
    awaiting_reset: bool = False          # latched, its condition gone: it waits for the operator's reset
