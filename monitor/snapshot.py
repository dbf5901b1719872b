"""The read-only picture of a running session that the screen and the status printers render."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from adapters.base import SourceStatus
from monitor.alarms.events import AlarmView
from monitor.model import Stats

__all__ = ["Stats", "SourceCounts", "AlarmView", "ReplayPosition", "Snapshot"]


@dataclass(frozen=True)
class SourceCounts:
    accepted: int = 0
    rejected: Mapping[str, int] = field(default_factory=dict)   # reason -> count
    lost: int = 0                                               # missing by seq
    unknown_keys: Mapping[str, int] = field(default_factory=dict)
    rate: float = 0.0                                           # accepted readings/s, recent
    last_data_time: float | None = None
    last_wall_time: float | None = None


@dataclass(frozen=True)
class ReplayPosition:
    time: float
    start: float
    end: float | None
    speed: float | None            # None = as fast as possible
    paused: bool


@dataclass(frozen=True)
class Snapshot:
    """Everything a screen frame or a status line needs; built by Session.snapshot()."""

    data_time: float | None
    wall_time: float
    latest: Mapping[str, tuple[float, float | None]]   # name -> (value, sigma), base and derived
    stats: Mapping[str, Stats]
    trail_t: np.ndarray                                # recent times, for trends and the regime map
    trail: Mapping[str, np.ndarray]                    # name -> recent values (ne, Te, debye_length, ...)
    warnings: tuple[str, ...]                          # warning codes active on the latest sample
    sources: Mapping[str, SourceStatus]
    counts: Mapping[str, SourceCounts]
    alarms: tuple[AlarmView, ...]
    discharge_on: bool
    live: bool
    replay: ReplayPosition | None = None
    recording: str | None = None                       # current recording file, if any
    flood: bool = False
    alarm_rate_10min: int = 0
    chattering: tuple[str, ...] = ()
    recorder: Any = None                               # the recorder's RecorderStatus, when the run records
    discharge_known: bool = True                       # False: no density judged yet (discharge_on is a guess)
    # the one state of each source, the same on the screen and in the headless lines: connected,
    # stale (connected, but its data stopped: its stale alarm is up), connecting, disconnected, ended, failed
    source_states: Mapping[str, str] = field(default_factory=dict)
