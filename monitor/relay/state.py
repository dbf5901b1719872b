"""The relay's values as JSON and back: alarm events and views, source status and counts, the state snapshot."""

from __future__ import annotations

from dataclasses import asdict
from typing import Any, Mapping

import numpy as np

from adapters.base import LinkState, SourceStatus
from monitor.alarms.events import AlarmEvent, AlarmState, AlarmView, Priority
from monitor.model import Frame, Stats
from monitor.relay.wire import clean
from monitor.snapshot import ReplayPosition, Snapshot, SourceCounts

__all__ = ["view_json", "view_from", "event_json", "event_from", "status_json", "status_from", "counts_from",
           "state_header", "frame_latest", "data_fields", "data_columns"]

_EVENT_KEYS = ("time", "wall", "alarm", "state", "previous", "quantity", "value", "limit", "priority", "kind",
               "action", "message", "predicted_time")


def view_json(view: AlarmView) -> dict[str, Any]:
    d: dict[str, Any] = clean(asdict(view))
    d["state"], d["priority"] = view.state.value, view.priority.value
    return d


def view_from(d: Mapping[str, Any]) -> AlarmView:
    return AlarmView(alarm=str(d["alarm"]), state=AlarmState(d["state"]), priority=Priority(d["priority"]),
                     kind=str(d.get("kind", "limit")), quantity=d.get("quantity"), value=_f(d.get("value")),
                     limit=_f(d.get("limit")), since=_f(d.get("since")), description=str(d.get("description", "")),
                     predicted_time=_f(d.get("predicted_time")), latched=bool(d.get("latched", False)),
                     shelved_until=_f(d.get("shelved_until")))


def event_json(event: AlarmEvent) -> dict[str, Any]:
    d: dict[str, Any] = clean(event.to_json())
    return d


def event_from(d: Mapping[str, Any]) -> AlarmEvent:
    kw = {k: d.get(k) for k in _EVENT_KEYS}
    return AlarmEvent(time=float(kw["time"] or 0.0), wall=float(kw["wall"] or 0.0), alarm=str(kw["alarm"]),
                      state=AlarmState(kw["state"]), previous=AlarmState(kw["previous"]),
                      quantity=kw["quantity"], value=_f(kw["value"]), limit=_f(kw["limit"]),
                      priority=Priority(kw["priority"]), kind=str(kw["kind"] or "limit"), action=kw["action"],
                      message=str(kw["message"] or ""), predicted_time=_f(kw["predicted_time"]))


def status_json(status: SourceStatus) -> dict[str, Any]:
    return {"name": status.name, "state": status.state.value, "message": status.message, "retries": status.retries}


def status_from(d: Mapping[str, Any]) -> SourceStatus:
    return SourceStatus(str(d["name"]), LinkState(d["state"]), str(d.get("message", "")), int(d.get("retries", 0)))


def counts_from(d: Mapping[str, Any]) -> SourceCounts:
    return SourceCounts(accepted=int(d.get("accepted", 0)), rejected=dict(d.get("rejected") or {}),
                        lost=int(d.get("lost", 0)), unknown_keys=dict(d.get("unknown_keys") or {}),
                        rate=float(d.get("rate") or 0.0), last_data_time=_f(d.get("last_data_time")),
                        last_wall_time=_f(d.get("last_wall_time")))


def stats_from(d: Mapping[str, Any]) -> Stats:
    return Stats(n=int(d.get("n", 0)), mean=_nan(d.get("mean")), std=_nan(d.get("std")), min=_nan(d.get("min")),
                 max=_nan(d.get("max")), slope=_nan(d.get("slope")))


def state_header(snap: Snapshot, trail_names: tuple[str, ...], recent: list[AlarmEvent]) -> dict[str, Any]:
    """Everything of ``snap`` but the trail (which travels as binary columns ``t`` + ``trail_names``)."""
    replay = snap.replay
    return {
        "data_time": snap.data_time, "wall_time": snap.wall_time,
        "latest": {k: [v, s] for k, (v, s) in snap.latest.items()}, "warnings": list(snap.warnings),
        "stats": {k: asdict(s) for k, s in snap.stats.items()},
        "sources": {k: status_json(s) for k, s in snap.sources.items()},
        "counts": {k: asdict(c) for k, c in snap.counts.items()},
        "alarms": [view_json(v) for v in snap.alarms],
        "discharge_on": snap.discharge_on, "discharge_known": snap.discharge_known, "live": snap.live,
        "replay": None if replay is None else asdict(replay), "recording": snap.recording,
        "flood": snap.flood, "alarm_rate_10min": snap.alarm_rate_10min, "chattering": list(snap.chattering),
        "recent": [event_json(e) for e in recent], "trail_names": list(trail_names),
    }


def snapshot_from(h: Mapping[str, Any], trail_t: np.ndarray, trail: Mapping[str, np.ndarray], *,
                  wall_time: float, alarms: tuple[AlarmView, ...], counts: Mapping[str, SourceCounts],
                  sources: Mapping[str, SourceStatus], latest: Mapping[str, tuple[float, float | None]],
                  warnings: tuple[str, ...], data_time: float | None, discharge: bool | None) -> Snapshot:
    """The Snapshot a console shows: the owner's last state ``h`` brought up to date by the stream."""
    replay = h.get("replay")
    return Snapshot(
        data_time=data_time, wall_time=wall_time, latest=dict(latest),
        stats={k: stats_from(v) for k, v in (h.get("stats") or {}).items()},
        trail_t=trail_t, trail=dict(trail), warnings=warnings, sources=dict(sources), counts=dict(counts),
        alarms=alarms, discharge_on=bool(discharge) if discharge is not None else bool(h.get("discharge_on")),
        discharge_known=discharge is not None or bool(h.get("discharge_known", False)), live=bool(h.get("live", True)),
        replay=None if not replay else ReplayPosition(float(replay["time"]), float(replay["start"]),
                                                      _f(replay.get("end")), _f(replay.get("speed")),
                                                      bool(replay.get("paused"))),
        recording=h.get("recording"), flood=bool(h.get("flood", False)),
        alarm_rate_10min=int(h.get("alarm_rate_10min", 0)), chattering=tuple(h.get("chattering") or ()))


def frame_latest(frame: Frame) -> tuple[dict[str, list[float | None]], list[str]]:
    """The last sample's value and sigma of every quantity, and the warnings on it (as the run view keeps them)."""
    latest: dict[str, list[float | None]] = {}
    for name, arr in frame.values.items():
        s = frame.sigma.get(name)
        latest[name] = [float(arr[-1]), float(s[-1]) if s is not None and np.isfinite(s[-1]) else None]
    warnings = [k for k, m in frame.warnings.items() if len(m) and bool(m[-1])]
    return latest, warnings


def data_fields(frame: Frame, names: tuple[str, ...]) -> list[str]:
    """The columns of a data message: t, seq, discharge, then each of ``names`` the frame carries, and its
    ``.sigma`` where it has one."""
    fields = ["t", "seq", "discharge"]
    for name in names:
        if name in frame.values:
            fields.append(name)
            if name in frame.sigma:
                fields.append(name + ".sigma")
    return fields


def data_columns(frame: Frame, fields: list[str]) -> list[np.ndarray]:
    n = len(frame)
    nan = np.full(n, np.nan)
    cols = [frame.t, nan if frame.seq is None else frame.seq.astype(np.float64),
            nan if frame.discharge is None else frame.discharge.astype(np.float64)]
    for name in fields[3:]:
        cols.append(frame.sigma[name[:-6]] if name.endswith(".sigma") else frame.values[name])
    return cols


def _f(x: Any) -> float | None:
    return None if x is None else float(x)


def _nan(x: Any) -> float:
    return float("nan") if x is None else float(x)
