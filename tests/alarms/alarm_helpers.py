"""Shared helpers for the alarm tests (imported by name; no fixtures): frames from arrays, an injected wall clock."""

from __future__ import annotations

import itertools
from typing import Any, Iterable, Mapping

import numpy as np

from monitor.alarms.engine import AlarmEngine
from monitor.alarms.envelope import AlarmOptions, LimitSpec, parse_alarm_options, parse_limits
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame

ON = 1e17          # a density well above on_above (discharge on)
OFF = 1e13         # below it (discharge off)


class FakeClock:
    """Wall clock for tests: each read advances by one second from 1000."""

    def __init__(self) -> None:
        self._it = itertools.count(1000.0)

    def __call__(self) -> float:
        return float(next(self._it))


def frame(t: Iterable[float], source: str = "probe", valid: Any = None, sigma: Mapping[str, Any] | None = None,
          **values: Any) -> Frame:
    """A Frame with ``ne`` on (unless given) and the named quantities as arrays."""
    tt = np.asarray(list(t) if not isinstance(t, np.ndarray) else t, dtype=np.float64)
    vals = {k: np.broadcast_to(np.asarray(v, dtype=np.float64), tt.shape).copy() for k, v in values.items()}
    vals.setdefault("ne", np.full(len(tt), ON))
    sig = {k: np.broadcast_to(np.asarray(v, dtype=np.float64), tt.shape).copy() for k, v in (sigma or {}).items()}
    return Frame(source=source, t=tt, values=vals, sigma=sig,
                 valid=None if valid is None else np.asarray(valid, dtype=bool))


def engine(limits: list[dict[str, Any]] | tuple[LimitSpec, ...], options: dict[str, Any] | AlarmOptions | None = None,
           **kw: Any) -> AlarmEngine:
    specs = parse_limits(limits, "test.toml") if isinstance(limits, list) else limits
    opts = options if isinstance(options, AlarmOptions) else parse_alarm_options(options or {}, "test.toml")
    kw.setdefault("clock", FakeClock())
    kw.setdefault("on_above", 1e15)
    return AlarmEngine(specs, opts, **kw)


def summary(events: list[AlarmEvent], alarm: str | None = None) -> list[tuple[float, str, str]]:
    """(time rounded to 1 us, previous, state) of the events, optionally of one alarm."""
    return [(round(e.time, 6), e.previous.value, e.state.value) for e in events if alarm is None or e.alarm == alarm]
