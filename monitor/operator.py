"""Operator commands as typed values (acknowledge, shelve, reset, seek, ...), applied to a run in one place."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Union

from monitor.errors import UsageError

__all__ = ["command_name", "Acknowledge", "Shelve", "Unshelve", "Reset", "OutOfService", "AlarmCommand",
           "Seek", "Pause", "Resume", "StepReplay", "SetSpeed", "ReplayCommand", "Command", "UnknownAlarm"]


class UnknownAlarm(UsageError, KeyError):
    """An alarm id the engine does not know: the operator's mistake, said with the known ids
    (a UsageError for the command line, a KeyError for a lookup)."""

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else "unknown alarm"


@dataclass(frozen=True)
class Acknowledge:
    """Acknowledge one alarm, or every alarm waiting for it (``alarm`` None)."""

    alarm: str | None = None
    by: str | None = None     # who asked, when not this console (a relay's operator key)


@dataclass(frozen=True)
class Shelve:
    """Shelve for ``seconds`` (None: one-shot, until the alarm returns to normal)."""

    alarm: str
    seconds: float | None = None
    by: str | None = None     # who asked, when not this console (a relay's operator key)


@dataclass(frozen=True)
class Unshelve:
    alarm: str
    by: str | None = None     # who asked, when not this console (a relay's operator key)


@dataclass(frozen=True)
class Reset:
    """Reset a latched alarm whose condition has returned."""

    alarm: str
    by: str | None = None     # who asked, when not this console (a relay's operator key)


@dataclass(frozen=True)
class OutOfService:
    alarm: str
    flag: bool = True
    by: str | None = None     # who asked, when not this console (a relay's operator key)


@dataclass(frozen=True)
class Seek:
    """Replay: go to data time ``t`` (s)."""

    t: float


@dataclass(frozen=True)
class Pause:
    pass


@dataclass(frozen=True)
class Resume:
    pass


@dataclass(frozen=True)
class StepReplay:
    pass


@dataclass(frozen=True)
class SetSpeed:
    """Replay speed: times data time, None as fast as possible."""

    speed: float | None


AlarmCommand = Union[Acknowledge, Shelve, Unshelve, Reset, OutOfService]
ReplayCommand = Union[Seek, Pause, Resume, StepReplay, SetSpeed]
Command = Union[AlarmCommand, ReplayCommand]

_NAMES = {Acknowledge: "acknowledge", Shelve: "shelve", Unshelve: "unshelve", Reset: "reset",
          OutOfService: "out of service", Seek: "seek", Pause: "pause", Resume: "resume", StepReplay: "step",
          SetSpeed: "speed"}


def command_name(command: Command) -> str:
    """The command's name in the operator's words (messages, journals, the relay's requests)."""
    return _NAMES[type(command)]
