"""What the screen and the printers read of a run: the latest readings and trail (fed by frames), the snapshot and the summary."""

from __future__ import annotations

import collections
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from adapters.base import SourceStatus
from monitor.alarms.engine import AlarmEngine
from monitor.alarms.events import AlarmEvent
from monitor.config import Config
from monitor.model import Frame
from monitor.pipeline import Pipeline
from monitor.pipeline.rolling import Trail
from monitor.recording.recorder import RecorderStatus
from monitor.snapshot import AlarmView, ReplayPosition, Snapshot

__all__ = ["RunView", "RunFacts", "TRAIL_BASE", "ATTENTION", "EventCounts", "source_state"]

TRAIL_BASE: tuple[str, ...] = ("ne", "Te", "debye_length")
# alarm states that want the operator's attention ("alarms_active" in the summary)
ATTENTION = frozenset({"unacknowledged", "acknowledged", "returned_unacknowledged"})


def source_state(status: SourceStatus, alarms: tuple[AlarmView, ...]) -> str:
    """The one state a source is in, as the screen and the headless lines both say it: its link state,
    except that a connected source whose data stopped (its ``:stale`` alarm active) is ``stale``."""
    if status.state.value == "connected":
        if any(v.alarm == f"{status.name}:stale" and v.active for v in alarms):
            return "stale"
    return status.state.value


class EventCounts:
    """Alarm events of the run: how many, by state, and the most recent ones."""

    def __init__(self, keep: int = 200) -> None:
        self.total = 0
        self.by_state: collections.Counter[str] = collections.Counter()
        self.recent: collections.deque[AlarmEvent] = collections.deque(maxlen=keep)

    def on_alarm(self, event: AlarmEvent) -> None:
        self.total += 1
        self.by_state[event.state.value] += 1
        self.recent.append(event)


@dataclass(frozen=True)
class RunFacts:
    """The run's own facts the view does not keep: its clock, source state and errors."""

    name: str
    status: SourceStatus
    live: bool
    data_time: float | None
    first_time: float | None
    wall_time: float
    started: float
    failure: str | None
    sink_errors: int
    internal_errors: int
    replay: ReplayPosition | None
    recorder: RecorderStatus | None


class RunView:
    """Subscribed to the frames: the latest value and sigma of every quantity, the warnings on the
    latest sample and the trail the screen draws; builds the Snapshot and the summary."""

    def __init__(self, config: Config) -> None:
        self.config = config
        names = list(TRAIL_BASE)
        for lim in config.limits:
            if lim.quantity not in names:
                names.append(lim.quantity)
        self.trail_names = tuple(names)
        self.latest: dict[str, tuple[float, float | None]] = {}
        self.warnings: tuple[str, ...] = ()
        self.events = EventCounts()
        self.restart()

    def restart(self) -> None:
        """Time started over: the trail begins afresh (the latest values stay until replaced)."""
        opts = self.config.pipeline
        self.trail = Trail(self.trail_names, opts.trail_seconds, opts.trail_points)

    def on_frame(self, frame: Frame) -> None:
        latest: dict[str, tuple[float, float | None]] = {}
        for name, arr in frame.values.items():
            s = frame.sigma.get(name)
            sv = float(s[-1]) if s is not None and np.isfinite(s[-1]) else None
            latest[name] = (float(arr[-1]), sv)
        self.latest = latest
        self.warnings = tuple(k for k, m in frame.warnings.items() if len(m) and bool(m[-1]))
        self.trail.add(frame.t, frame.values)

    def snapshot(self, facts: RunFacts, pipeline: Pipeline, engine: AlarmEngine | None) -> Snapshot:
        trail_t, trail = self.trail.arrays()
        flood, rate10, chatter = False, 0, tuple[str, ...]()
        alarms: tuple[AlarmView, ...] = ()
        if engine is not None:
            alarms = tuple(engine.views())
            rate10, flood, chatter = engine.load()
        on = pipeline.discharge.on
        state = source_state(facts.status, alarms)
        return Snapshot(
            data_time=facts.data_time, wall_time=facts.wall_time, latest=dict(self.latest),
            stats=pipeline.stats(facts.name) or pipeline.stats(),
            trail_t=trail_t, trail=trail, warnings=self.warnings,
            sources={facts.name: facts.status}, counts=pipeline.counts(), alarms=alarms,
            discharge_on=bool(on), discharge_known=on is not None, source_states={facts.name: state},
            live=facts.live, replay=facts.replay,
            recording=None if facts.recorder is None else facts.recorder.file, recorder=facts.recorder,
            flood=bool(flood), alarm_rate_10min=int(rate10), chattering=tuple(chatter),
        )

    def summary(self, facts: RunFacts, pipeline: Pipeline, engine: AlarmEngine | None) -> dict[str, Any]:
        """The summary contract: accepted, rejected {reason: n}, lost, and more."""
        counts = pipeline.counts()
        rejected: collections.Counter[str] = collections.Counter()
        unknown: collections.Counter[str] = collections.Counter()
        for c in counts.values():
            rejected.update(c.rejected)
            unknown.update(c.unknown_keys)
        active: Sequence[str] = []
        if engine is not None:
            active = [v.alarm for v in engine.views() if v.state.value in ATTENTION]
        status = facts.status
        return {
            "type": "summary",
            "source": facts.name,
            "accepted": sum(c.accepted for c in counts.values()),
            "rejected": dict(sorted(rejected.items())),
            "rejected_total": int(sum(rejected.values())),
            "lost": sum(c.lost for c in counts.values()),
            "unknown_keys": dict(sorted(unknown.items())),
            "restarts": sum(pipeline.restarts().values()),
            "data_time_first": facts.first_time,
            "data_time_last": facts.data_time,
            "wall_seconds": round(facts.wall_time - facts.started, 3),
            "state": status.state.value,
            "message": status.message,
            "failure": facts.failure,
            "alarm_events": self.events.total,
            "alarm_events_by_state": dict(sorted(self.events.by_state.items())),
            "alarms_active": list(active),
            "sink_errors": facts.sink_errors,
            "internal_errors": facts.internal_errors,
        }
